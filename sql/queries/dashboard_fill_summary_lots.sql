-- name: dashboard_fill_summary_lots
-- Writer (pipeline/dashboard_summary.py): fill summary_lots from check_results.
INSERT INTO summary_lots
SELECT lot_id, count(*) AS n_checks, count(DISTINCT instrument_id) AS n_units,
       min(measured_at) AS first_used_at, max(measured_at) AS last_used_at
FROM check_results
WHERE lot_id IS NOT NULL
GROUP BY lot_id;
