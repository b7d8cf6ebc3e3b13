-- name: dashboard_signals_recent
-- One row: a control-chart signal raised in the last $days days of data, with the unit's place
-- (in region $region, or anywhere when it is NULL). The $listed most pressing are returned
-- (fleet-significant first, then the newest); n_in_window counts all the window's signals.
-- requires: chart_signals, checks, instruments
SELECT s.measured_at, s.instrument_id, i.region, i.site_id, s.level, s.chart, s.rule, s.direction,
       s.size, s.onset_at, s.impact_checks, s.fleet_significant, count(*) OVER () AS n_in_window
FROM chart_signals s
LEFT JOIN instruments i USING (instrument_id)
WHERE s.measured_at >= (SELECT max(measured_at) FROM checks) - to_days(CAST($days AS INTEGER))
  AND (CAST($region AS VARCHAR) IS NULL OR i.region = CAST($region AS VARCHAR))
ORDER BY s.fleet_significant DESC NULLS LAST, s.measured_at DESC
LIMIT $listed;
