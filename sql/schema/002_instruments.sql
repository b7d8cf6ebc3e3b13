-- name: instruments
-- One row: an evidential breath test instrument, identified by its serial number.
CREATE TABLE IF NOT EXISTS instruments (
    instrument_id  TEXT PRIMARY KEY,
    technology     TEXT NOT NULL,     -- fuel_cell, infrared, dual, semiconductor
    model          TEXT,
    site_id        TEXT,
    region         TEXT,
    in_service_on  DATE,
    latitude       DOUBLE,
    longitude      DOUBLE
);
