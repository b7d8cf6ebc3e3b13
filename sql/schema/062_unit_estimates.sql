-- name: unit_estimates
-- One row: a unit's estimated bias (at its last check) and drift for one baseline period in one fit.
CREATE TABLE IF NOT EXISTS unit_estimates (
    fit_id            BIGINT NOT NULL,
    instrument_id     TEXT NOT NULL,
    baseline_period   INTEGER NOT NULL,
    bias_pct          DOUBLE,    -- intercept + drift x time since calibration, at reference_at
    bias_ci_low_pct   DOUBLE,
    bias_ci_high_pct  DOUBLE,
    drift_pct_per_30d DOUBLE,    -- fleet mean drift + the unit's own
    drift_ci_low      DOUBLE,
    drift_ci_high     DOUBLE,
    bias_drift_cov    DOUBLE,    -- covariance of bias_pct and drift_pct_per_30d, for forecasting
    reference_at      TIMESTAMP, -- the unit's last check in the period (UTC)
    variance_share    DOUBLE,    -- bias^2 / sum of bias^2 over the fleet's unit-periods
    n_checks          BIGINT,
    last_check_at     TIMESTAMP,
    PRIMARY KEY (fit_id, instrument_id, baseline_period)
);
