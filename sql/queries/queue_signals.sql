-- name: queue_signals
-- One row: a chart signal raised in the $window_days before $as_of, with the lot of the check that raised it.
SELECT s.signal_id, s.instrument_id, s.level, s.measured_at, s.chart, s.rule, s.direction, s.size, s.onset_at,
       s.impact_checks, coalesce(s.fleet_significant, FALSE) AS fleet_significant, c.lot_id
FROM chart_signals s
LEFT JOIN checks c ON c.check_id = s.check_id
WHERE s.measured_at <= $as_of AND s.measured_at > $as_of - to_days(CAST($window_days AS INTEGER))
ORDER BY s.instrument_id, s.measured_at, s.signal_id;
