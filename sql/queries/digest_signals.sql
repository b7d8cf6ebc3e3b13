-- name: digest_signals
-- One row: a chart signal raised in [$start, $end), with its impact window and the unit's place.
SELECT s.instrument_id, i.region, s.level, s.measured_at, s.chart, s.rule, s.direction, s.size, s.onset_at,
       s.impact_checks, coalesce(s.fleet_significant, FALSE) AS fleet_significant
FROM chart_signals s
LEFT JOIN instruments i USING (instrument_id)
WHERE s.measured_at >= $start AND s.measured_at < $end
ORDER BY s.measured_at, s.instrument_id, s.level, s.chart, s.rule;
