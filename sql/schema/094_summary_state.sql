-- name: summary_state
-- One row: what the dashboard summaries (summary_* tables) were computed from and how: the
-- highest check_id and the data range they include, when, with which parameters and version.
CREATE TABLE IF NOT EXISTS summary_state (
    state_id          INTEGER PRIMARY KEY,   -- always 1
    checks_through    BIGINT NOT NULL,       -- check_results rows with check_id <= this are included
    n_checks          BIGINT NOT NULL,
    first_check_at    TIMESTAMP,
    last_check_at     TIMESTAMP,
    computed_at       TIMESTAMP NOT NULL,    -- wall clock, UTC
    parameters        TEXT NOT NULL,         -- JSON: funnel windows
    software_version  TEXT NOT NULL,
    seconds           DOUBLE NOT NULL
);
