-- name: queue_estimates
-- One row: a unit's latest-period estimates (bias, drift, their uncertainty) from the latest converged
-- fleet model fit at or before $as_of.
WITH fit AS (
    SELECT fit_id FROM model_fits WHERE converged AND window_end <= $as_of
    ORDER BY window_end DESC, fit_id DESC LIMIT 1
)
SELECT instrument_id, baseline_period, bias_pct, bias_ci_low_pct, bias_ci_high_pct,
       drift_pct_per_30d, drift_ci_low, drift_ci_high, coalesce(bias_drift_cov, 0) AS bias_drift_cov,
       reference_at, n_checks AS model_n_checks
FROM unit_estimates
WHERE fit_id = (SELECT fit_id FROM fit)
QUALIFY row_number() OVER (PARTITION BY instrument_id ORDER BY baseline_period DESC) = 1
ORDER BY instrument_id;
