-- name: dashboard_unit_checks
-- One row: one of the latest $max_points checks of unit $instrument_id at level $level, with
-- its relative error (percent), verdict and lot.
-- requires: check_results
SELECT check_id, measured_at, lot_id, check_type, level, expected, measured,
       relative_error * 100 AS relative_error_pct, verdict, outcome, baseline_period
FROM check_results
WHERE instrument_id = $instrument_id AND level = $level
ORDER BY measured_at DESC
LIMIT $max_points;
