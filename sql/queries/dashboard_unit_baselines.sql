-- name: dashboard_unit_baselines
-- One row: a frozen chart baseline of unit $instrument_id (CUSUM decision interval in parameters:
-- the run's that froze it, or the baseline's own copy when it was frozen before runs held them).
-- requires: chart_baselines, chart_runs
SELECT b.level, b.baseline_period, b.version, b.frozen_at, b.reason, b.sigma_source, b.center, b.sigma, b.n_checks,
       coalesce(b.parameters, r.parameters) AS parameters, b.software_version
FROM chart_baselines b
LEFT JOIN chart_runs r USING (run_id)
WHERE b.instrument_id = $instrument_id
ORDER BY b.level, b.baseline_period, b.version;
