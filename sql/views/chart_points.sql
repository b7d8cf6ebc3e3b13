-- name: chart_points
-- One row: one charted check (control, daily, verification) of a chart series (unit, level,
-- baseline segment) with its standardised value and the individuals, moving-range, CUSUM and
-- EWMA statistics (z units, sigma 1). The stored tables are chart_series and chart_point_values
-- (sql/schema/105_chart_series.sql); read points here.
CREATE OR REPLACE VIEW chart_points AS
SELECT v.check_id, s.instrument_id, s.level, s.baseline_period, v.measured_at, v.position, v.relative_error, v.z,
       v.moving_range, v.cusum_upper, v.cusum_lower, v.ewma, v.ewma_ucl, v.center, v.sigma, v.own_sigma
FROM chart_point_values v
JOIN chart_series s USING (series_id);
