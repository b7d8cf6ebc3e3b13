-- name: dashboard_unit_points
-- One row: a charted check of unit $instrument_id at level $level measured at or after $since
-- (the page's time window), the latest $max_points at most, with its standardised value, moving
-- range, CUSUM, EWMA and limits from its frozen baseline.
-- requires: chart_points
SELECT check_id, measured_at, baseline_period, z, moving_range, cusum_upper, cusum_lower,
       ewma, ewma_lcl, ewma_ucl, center, sigma, ind_lcl, ind_ucl, mr_ucl
FROM chart_points
WHERE instrument_id = $instrument_id AND level = $level AND measured_at >= $since
ORDER BY measured_at DESC
LIMIT $max_points;
