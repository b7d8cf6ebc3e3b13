-- name: dashboard_unit_signals
-- One row: a control-chart signal of unit $instrument_id at or after $since (the page's time
-- window), at any level, with its impact window (onset to signal).
-- requires: chart_signals
SELECT signal_id, level, check_id, measured_at, chart, rule, direction, size,
       coalesce(onset_at, measured_at) AS onset_at, impact_checks, fleet_significant
FROM chart_signals
WHERE instrument_id = $instrument_id AND measured_at >= $since
ORDER BY measured_at DESC;
