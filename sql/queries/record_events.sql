-- name: record_events
-- One row: a service event (calibration, repair, solution change...) of $instrument_id in [$start, $end).
SELECT event_at, event_type, notes FROM service_events
WHERE instrument_id = $instrument_id AND event_at >= $start AND event_at < $end
ORDER BY event_at, event_type;
