-- name: dashboard_fill_summary_funnel
-- Writer (pipeline/dashboard_summary.py): fill summary_funnel from check_results for each window in
-- $windows (days before the latest check). Source: Spiegelhalter (2005), Statistics in Medicine
-- 24:1185-1202, section 3 (per-unit mean and within-unit variance).
INSERT INTO summary_funnel
WITH windows AS (
    SELECT w AS window_days, (SELECT max(measured_at) FROM check_results) - to_days(CAST(w AS INTEGER)) AS since
    FROM (SELECT unnest(CAST($windows AS INTEGER[])) AS w)
)
SELECT w.window_days, r.level, r.instrument_id, count(*) AS n_checks,
       avg(r.relative_error * 100) AS mean_pct, var_samp(r.relative_error * 100) AS var_pct
FROM check_results r
JOIN windows w ON r.measured_at >= w.since
WHERE r.relative_error IS NOT NULL
GROUP BY w.window_days, r.level, r.instrument_id;
