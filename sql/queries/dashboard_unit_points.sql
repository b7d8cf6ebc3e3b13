-- name: dashboard_unit_points
-- One row: a charted check of unit $instrument_id at level $level (latest $max_points), with its
-- standardised value, moving range, CUSUM, EWMA and limits from its frozen baseline.
-- requires: chart_points
SELECT check_id, measured_at, baseline_period, z, moving_range, cusum_upper, cusum_lower,
       ewma, ewma_lcl, ewma_ucl, center, sigma, ind_lcl, ind_ucl, mr_ucl
FROM chart_points
WHERE instrument_id = $instrument_id AND level = $level
ORDER BY measured_at DESC
LIMIT $max_points;
