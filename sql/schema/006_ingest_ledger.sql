-- name: ingest_ledger
-- One row: one file ingested. Invariant: rows_read = rows_stored + rows_duplicate + rows_quarantined.
CREATE TABLE IF NOT EXISTS ingest_ledger (
    file_id           INTEGER PRIMARY KEY,
    path              TEXT NOT NULL,
    sha256            TEXT NOT NULL,
    table_name        TEXT NOT NULL,          -- checks, instruments, sites, lots, service_events
    profile           TEXT,                   -- profile name, or 'canonical'
    rows_read         BIGINT NOT NULL,
    rows_stored       BIGINT NOT NULL,
    rows_duplicate    BIGINT NOT NULL,
    rows_quarantined  BIGINT NOT NULL,
    started_at        TIMESTAMP NOT NULL,
    finished_at       TIMESTAMP NOT NULL,
    software_version  TEXT NOT NULL
);
