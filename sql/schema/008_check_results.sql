-- name: check_results
-- One row: one stored check with everything later features read (context, expected value,
-- correction, error, breathfleet's own verdict, data-quality flags). A table, not a view:
-- pipeline/check_results.py fills it from the view check_results_live (sql/views/) when data
-- or settings change, incrementally for new checks, so that charts, model, reports and the
-- dashboard read 10 million checks without recomputing them. Columns as in check_results_live,
-- plus checks_since_solution_change (a window over each unit's checks, kept by the refresh).
DROP VIEW IF EXISTS check_results;
CREATE TABLE IF NOT EXISTS check_results (
    check_id                      BIGINT NOT NULL,        -- one row per check (kept by the refresh)
    instrument_id                 VARCHAR,
    measured_at                   TIMESTAMP,
    lot_id                        VARCHAR,
    check_type                    VARCHAR,
    level                         DOUBLE,     -- target rounded to 3 decimals, g/210L
    target                        DOUBLE,
    measured                      DOUBLE,
    units                         VARCHAR,
    simulator_temp_c              DOUBLE,
    pressure_kpa                  DOUBLE,
    site_id                       VARCHAR,
    operator_id                   VARCHAR,
    outcome                       VARCHAR,
    technology                    VARCHAR,
    model                         VARCHAR,
    region                        VARCHAR,
    standard_kind                 VARCHAR,
    baseline_period               BIGINT,
    baseline_started_at           TIMESTAMP,
    solution_changed_at           TIMESTAMP,
    checks_since_solution_change  BIGINT,     -- wet bath: checks of the unit since its last solution change
    expected_raw                  DOUBLE,
    expected                      DOUBLE,
    correction_factor             DOUBLE,
    correction_method             VARCHAR,
    error                         DOUBLE,
    relative_error                DOUBLE,
    verdict                       VARCHAR,
    lot_expired                   BOOLEAN,
    lot_wrong_kind                BOOLEAN,
    lot_before_certified          BOOLEAN,
    temp_out_of_window            BOOLEAN,
    verdict_disagrees             BOOLEAN,
    tolerance                     DOUBLE,
    tolerance_rule_id             INTEGER
);
-- What the table was last refreshed from: the highest check_id included and digests of the
-- inputs other than checks (reference tables, settings, the view's SQL). One row.
CREATE TABLE IF NOT EXISTS check_results_state (
    state_id          INTEGER PRIMARY KEY,
    checks_through    BIGINT NOT NULL,      -- every check with check_id <= this is in check_results
    inputs_digest     VARCHAR NOT NULL,     -- lots, instruments, sites, standards settings, view SQL
    events_digest     VARCHAR NOT NULL,     -- service events
    refreshed_at      TIMESTAMP NOT NULL,
    mode              VARCHAR NOT NULL      -- full, units, new_checks, unchanged
);
-- The service events the table reflects, to find which units a changed event touches.
CREATE TABLE IF NOT EXISTS check_results_events (
    instrument_id     VARCHAR NOT NULL,
    event_at          TIMESTAMP NOT NULL,
    event_type        VARCHAR NOT NULL
);
