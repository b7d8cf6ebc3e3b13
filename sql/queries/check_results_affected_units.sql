-- name: check_results_affected_units
-- One row: a unit whose stored check_results rows must be recomputed whole: its baseline or
-- solution-change events differ from those the table reflects, or it has a check newer than
-- $through (by check_id) measured at or before its latest stored check (late data).
WITH events AS (
    SELECT instrument_id, event_at, event_type FROM service_events
    WHERE event_type IN ('calibration', 'sensor_replacement', 'solution_change')
),
changed_events AS (
    (SELECT * FROM events EXCEPT SELECT * FROM check_results_events)
    UNION ALL
    (SELECT * FROM check_results_events EXCEPT SELECT * FROM events)
),
fresh AS (
    SELECT instrument_id, min(measured_at) AS first_new FROM checks WHERE check_id > $through GROUP BY ALL
),
late AS (
    SELECT f.instrument_id
    FROM fresh f
    JOIN (SELECT instrument_id, max(measured_at) AS last_stored FROM check_results
          WHERE instrument_id IN (SELECT instrument_id FROM fresh) GROUP BY ALL) s USING (instrument_id)
    WHERE f.first_new <= s.last_stored
)
SELECT DISTINCT instrument_id FROM changed_events
UNION
SELECT instrument_id FROM late
ORDER BY instrument_id;
