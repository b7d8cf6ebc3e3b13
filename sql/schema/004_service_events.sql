-- name: service_events
-- One row: something done to an instrument. calibration and sensor_replacement start a
-- new baseline period; solution_change refreshes the wet-bath simulator solution.
CREATE TABLE IF NOT EXISTS service_events (
    instrument_id  TEXT NOT NULL,
    event_at       TIMESTAMP NOT NULL,   -- UTC
    event_type     TEXT NOT NULL,        -- calibration, repair, sensor_replacement, solution_change, out_of_service, return_to_service
    notes          TEXT,
    PRIMARY KEY (instrument_id, event_at, event_type)
);
