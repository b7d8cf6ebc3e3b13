-- name: dashboard_unit_baselines
-- One row: a frozen chart baseline of unit $instrument_id (CUSUM decision interval in parameters).
-- requires: chart_baselines
SELECT level, baseline_period, version, frozen_at, reason, sigma_source, center, sigma, n_checks,
       parameters, software_version
FROM chart_baselines
WHERE instrument_id = $instrument_id
ORDER BY level, baseline_period, version;
