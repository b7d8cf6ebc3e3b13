-- name: summary_weeks
-- One row: one week (UTC, Monday) and standard kind with the fleet-wide mean, 10th and 90th
-- percentile of relative error (percent) and the number of checks; written by the main job
-- (pipeline/dashboard_summary.py) for the fleet overview's trend.
CREATE TABLE IF NOT EXISTS summary_weeks (
    week           TIMESTAMP NOT NULL,
    standard_kind  TEXT NOT NULL,            -- wet_bath | dry_gas | (unknown)
    mean_pct       DOUBLE,
    p10_pct        DOUBLE,
    p90_pct        DOUBLE,
    n_checks       BIGINT NOT NULL
);
