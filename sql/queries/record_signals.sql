-- name: record_signals
-- One row: a chart signal of $instrument_id whose signal or onset lies in [$start, $end), with its impact window.
SELECT signal_id, level, measured_at, chart, rule, direction, size, onset_at, impact_checks,
       coalesce(fleet_significant, FALSE) AS fleet_significant
FROM chart_signals
WHERE instrument_id = $instrument_id
  AND ((measured_at >= $start AND measured_at < $end) OR (onset_at >= $start AND onset_at < $end))
ORDER BY measured_at, level, chart, rule, signal_id;
