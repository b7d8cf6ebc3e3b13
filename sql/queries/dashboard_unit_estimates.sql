-- name: dashboard_unit_estimates
-- One row: the latest converged fleet model's bias and drift estimate of unit $instrument_id, per baseline period.
-- requires: unit_estimates, model_fits
SELECT u.fit_id, f.fitted_at, f.converged, u.baseline_period, u.bias_pct, u.bias_ci_low_pct,
       u.bias_ci_high_pct, u.drift_pct_per_30d, u.drift_ci_low, u.drift_ci_high, u.reference_at,
       u.variance_share, u.n_checks, u.last_check_at
FROM unit_estimates u
JOIN model_fits f USING (fit_id)
WHERE u.instrument_id = $instrument_id
  AND u.fit_id = (SELECT fit_id FROM model_fits WHERE converged ORDER BY fitted_at DESC LIMIT 1)
ORDER BY u.baseline_period;
