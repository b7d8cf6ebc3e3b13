-- name: checks (without a primary key)
-- The primary-key index on check_id cost about half of each file's insert at fleet size. Ingest
-- alone writes checks, one file per transaction under DuckDB's single-writer lock, and numbers
-- them max(check_id) + source line, so ids stay unique and increasing without the index
-- (tests/test_ingest.py checks it). Same columns as 005.
CREATE TABLE checks_100 (
    check_id          BIGINT NOT NULL,        -- increases with ingest order (gaps where rows were not stored)
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
INSERT INTO checks_100 SELECT * FROM checks ORDER BY check_id;
DROP TABLE checks;
ALTER TABLE checks_100 RENAME TO checks;
