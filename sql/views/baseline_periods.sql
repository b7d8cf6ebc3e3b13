-- name: baseline_periods
-- One row: a baseline period of an instrument. Period 0 runs from the start of its data;
-- each calibration or sensor_replacement starts the next period.
CREATE OR REPLACE VIEW baseline_periods AS
WITH resets AS (
    SELECT instrument_id, event_at AS started_at, event_type AS started_by
    FROM service_events
    WHERE event_type IN ('calibration', 'sensor_replacement')
),
numbered AS (
    SELECT instrument_id, started_at, started_by,
           row_number() OVER (PARTITION BY instrument_id ORDER BY started_at) AS baseline_period
    FROM resets
)
SELECT instrument_id, 0 AS baseline_period, TIMESTAMP '1900-01-01' AS started_at,
       'start_of_record' AS started_by
FROM instruments
UNION ALL
SELECT instrument_id, baseline_period, started_at, started_by FROM numbered;
