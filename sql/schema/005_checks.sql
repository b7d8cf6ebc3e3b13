-- name: checks
-- One row: one measured check-standard result, converted to g/210L and UTC.
-- An exact duplicate (same instrument, time, lot, check type and result) is never stored twice.
CREATE TABLE IF NOT EXISTS checks (
    check_id          BIGINT PRIMARY KEY,     -- increases with ingest order
    instrument_id     TEXT NOT NULL,
    measured_at       TIMESTAMP NOT NULL,     -- UTC, without offset
    lot_id            TEXT NOT NULL,
    check_type        TEXT NOT NULL,          -- control, daily, verification, calibration
    target            DOUBLE NOT NULL,        -- g/210L
    measured          DOUBLE NOT NULL,        -- g/210L
    units             TEXT NOT NULL,          -- unit of the source file, before conversion
    simulator_temp_c  DOUBLE,
    pressure_kpa      DOUBLE,
    site_id           TEXT,
    operator_id       TEXT,                   -- keyed hash of the source operator code
    outcome           TEXT,                   -- pass, fail, aborted, invalid (the instrument's own verdict)
    file_id           INTEGER NOT NULL,       -- ingest_ledger.file_id
    line              BIGINT NOT NULL         -- physical line in the source file (the header is line 1)
);
-- Exact duplicates are skipped by ingest with an anti-join (pipeline/sources/ingest.py), which is
-- cheaper at fleet size than a five-column unique index.
