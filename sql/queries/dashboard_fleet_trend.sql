-- name: dashboard_fleet_trend
-- One row: one week and standard kind, with the fleet-wide mean, 10th and 90th percentile of
-- relative error (percent) and the number of checks.
-- requires: check_results
SELECT date_trunc('week', measured_at) AS week, coalesce(standard_kind, '(unknown)') AS standard_kind,
       avg(relative_error) * 100 AS mean_pct,
       quantile_cont(relative_error, 0.1) * 100 AS p10_pct,
       quantile_cont(relative_error, 0.9) * 100 AS p90_pct,
       count(*) AS n_checks
FROM check_results
WHERE relative_error IS NOT NULL
GROUP BY ALL
ORDER BY week, standard_kind;
