-- name: chart_runs
-- One row: one run of the chart engine (analyse), full or incremental, and how it was made.
CREATE TABLE IF NOT EXISTS chart_runs (
    run_id            BIGINT PRIMARY KEY,
    started_at        TIMESTAMP NOT NULL,
    duration_s        DOUBLE NOT NULL,
    mode              TEXT NOT NULL,       -- full | incremental
    n_new_checks      BIGINT NOT NULL,
    n_groups          BIGINT NOT NULL,
    n_signals         BIGINT NOT NULL,
    n_baselines       BIGINT NOT NULL,
    data_end          TIMESTAMP,
    parameters        TEXT NOT NULL,
    software_version  TEXT NOT NULL
);
