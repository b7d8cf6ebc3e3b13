-- name: sites
-- One row: a place where instruments stand, with its time zone and elevation.
CREATE TABLE IF NOT EXISTS sites (
    site_id      TEXT PRIMARY KEY,
    region       TEXT,
    time_zone    TEXT NOT NULL,       -- IANA name, used for local timestamps without offset
    latitude     DOUBLE,
    longitude    DOUBLE,
    elevation_m  DOUBLE              -- gives a nominal pressure where a dry-gas check logs none
);
