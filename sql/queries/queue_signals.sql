-- name: queue_signals
-- One row: a chart signal raised in the $window_days before $as_of.
SELECT signal_id, instrument_id, level, measured_at, chart, rule, direction, size, onset_at, impact_checks,
       coalesce(fleet_significant, FALSE) AS fleet_significant
FROM chart_signals
WHERE measured_at <= $as_of AND measured_at > $as_of - to_days(CAST($window_days AS INTEGER))
ORDER BY instrument_id, measured_at, signal_id;
