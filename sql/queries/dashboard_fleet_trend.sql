-- name: dashboard_fleet_trend
-- One row: one week and standard kind, with the fleet-wide mean, 10th and 90th percentile of
-- relative error (percent) and the number of checks (summary_weeks, as of the last main job).
-- requires: summary_weeks
SELECT week, standard_kind, mean_pct, p10_pct, p90_pct, n_checks
FROM summary_weeks
ORDER BY week, standard_kind;
