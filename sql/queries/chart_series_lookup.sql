-- name: chart_series_lookup
-- One row per row of _bf_series_keys (instrument_id, level, baseline_period, row): its series
-- number in chart_series, or -1 when the series is not numbered yet (pipeline/charts/series.py).
SELECT k.row, CAST(coalesce(s.series_id, -1) AS INTEGER) AS series_id
FROM _bf_series_keys k
LEFT JOIN chart_series s USING (instrument_id, level, baseline_period);
