-- name: dashboard_unit_points
-- One row: a charted check of unit $instrument_id at level $level measured at or after $since
-- (the page's time window), the latest $max_points at most, with its standardised value, moving
-- range, CUSUM, EWMA and limits from its frozen baseline. The EWMA limits are symmetric (the
-- lower is the upper negated); the individuals and moving-range limits are the same for every
-- point (z units) and come from the latest chart run.
-- requires: chart_points, chart_runs
SELECT p.check_id, p.measured_at, p.baseline_period, p.z, p.moving_range, p.cusum_upper, p.cusum_lower,
       p.ewma, -p.ewma_ucl AS ewma_lcl, p.ewma_ucl, p.center, p.sigma, r.ind_lcl, r.ind_ucl, r.mr_ucl
FROM chart_points p
LEFT JOIN (SELECT ind_lcl, ind_ucl, mr_ucl FROM chart_runs ORDER BY run_id DESC LIMIT 1) r ON TRUE
WHERE p.instrument_id = $instrument_id AND p.level = $level AND p.measured_at >= $since
ORDER BY p.measured_at DESC
LIMIT $max_points;
