-- name: summary_funnel
-- One row: one unit at one level over the last window_days days of data (ending at the latest
-- check), with its number of checks, mean and sample variance of relative error (percent): the
-- sufficient statistics of the comparison page's funnel plot (Spiegelhalter 2005), written by
-- the main job (pipeline/dashboard_summary.py) for each window the page offers.
CREATE TABLE IF NOT EXISTS summary_funnel (
    window_days    INTEGER NOT NULL,
    level          DOUBLE,
    instrument_id  TEXT NOT NULL,
    n_checks       BIGINT NOT NULL,
    mean_pct       DOUBLE NOT NULL,
    var_pct        DOUBLE                    -- NULL with one check
);
