-- name: queue_units
-- One row: an instrument with its place, check counts, last check, last calibration, recent
-- aborted/invalid counts and whether others at its site reported after it went silent (as of $as_of).
WITH c AS (
    SELECT instrument_id,
           count(*) AS n_checks,
           max(measured_at) AS last_check_at,
           count(*) FILTER (WHERE measured_at > $as_of - to_days(CAST($rate_days AS INTEGER))) AS n_recent,
           count(*) FILTER (WHERE measured_at > $as_of - to_days(CAST($rate_days AS INTEGER))
                            AND outcome IN ('aborted', 'invalid')) AS n_aborted_invalid
    FROM checks
    WHERE measured_at <= $as_of
    GROUP BY instrument_id
),
cal AS (
    -- a sensor replacement is followed by a calibration and starts a new baseline as one does
    SELECT instrument_id, max(event_at) AS last_calibration_at
    FROM service_events
    WHERE event_type IN ('calibration', 'sensor_replacement') AND event_at <= $as_of
    GROUP BY instrument_id
),
site_last AS (
    SELECT i.site_id, max(c.last_check_at) AS site_last_check_at
    FROM instruments i JOIN c USING (instrument_id)
    GROUP BY i.site_id
)
SELECT i.instrument_id, i.region, i.site_id, i.technology, i.model,
       coalesce(c.n_checks, 0) AS n_checks, c.last_check_at,
       coalesce(c.n_recent, 0) AS n_recent, coalesce(c.n_aborted_invalid, 0) AS n_aborted_invalid,
       cal.last_calibration_at, s.site_last_check_at
FROM instruments i
LEFT JOIN c USING (instrument_id)
LEFT JOIN cal USING (instrument_id)
LEFT JOIN site_last s ON s.site_id = i.site_id
ORDER BY i.instrument_id;
