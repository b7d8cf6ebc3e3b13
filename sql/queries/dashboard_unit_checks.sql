-- name: dashboard_unit_checks
-- One row: a check of unit $instrument_id at level $level measured at or after $since (the
-- page's time window), the latest $max_points at most, with its relative error (percent),
-- verdict and lot.
-- requires: check_results
SELECT check_id, measured_at, lot_id, check_type, level, expected, measured,
       relative_error * 100 AS relative_error_pct, verdict, outcome, baseline_period
FROM check_results
WHERE instrument_id = $instrument_id AND level = $level AND measured_at >= $since
ORDER BY measured_at DESC
LIMIT $max_points;
