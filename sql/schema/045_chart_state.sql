-- name: chart_state
-- One row: the carried state of one chart group (unit, level, segment) after its last charted
-- check, so an incremental run charts only new checks.
CREATE TABLE IF NOT EXISTS chart_state (
    instrument_id    TEXT NOT NULL,
    level            DOUBLE NOT NULL,
    baseline_period  INTEGER NOT NULL,
    n                BIGINT NOT NULL,
    sum_x            DOUBLE NOT NULL,
    cusum_upper      DOUBLE NOT NULL,
    cusum_lower      DOUBLE NOT NULL,
    cusum_upper_run  INTEGER NOT NULL,
    cusum_lower_run  INTEGER NOT NULL,
    ewma             DOUBLE NOT NULL,
    last_measured_at TIMESTAMP NOT NULL,
    last_check_id    BIGINT NOT NULL,
    PRIMARY KEY (instrument_id, level, baseline_period)
);
