-- name: dashboard_fill_summary_weeks
-- Writer (pipeline/dashboard_summary.py): fill summary_weeks from check_results.
INSERT INTO summary_weeks
SELECT date_trunc('week', measured_at) AS week, coalesce(standard_kind, '(unknown)') AS standard_kind,
       avg(relative_error) * 100 AS mean_pct,
       quantile_cont(relative_error, 0.1) * 100 AS p10_pct,
       quantile_cont(relative_error, 0.9) * 100 AS p90_pct,
       count(*) AS n_checks
FROM check_results
WHERE relative_error IS NOT NULL
GROUP BY ALL;
