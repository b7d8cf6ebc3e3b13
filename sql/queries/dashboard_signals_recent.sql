-- name: dashboard_signals_recent
-- One row: a control-chart signal raised in the last $days days of data, with the unit's place.
-- requires: chart_signals, checks, instruments
SELECT s.measured_at, s.instrument_id, i.region, i.site_id, s.level, s.chart, s.rule, s.direction,
       s.size, s.onset_at, s.impact_checks, s.fleet_significant
FROM chart_signals s
LEFT JOIN instruments i USING (instrument_id)
WHERE s.measured_at >= (SELECT max(measured_at) FROM checks) - to_days(CAST($days AS INTEGER))
ORDER BY s.measured_at DESC
LIMIT 500;
