-- name: dashboard_ingest_ledger
-- One row: one ingested file (latest 500), with its row accounting.
-- requires: ingest_ledger
SELECT file_id, path, table_name, profile, rows_read, rows_stored, rows_duplicate, rows_quarantined,
       rows_read = rows_stored + rows_duplicate + rows_quarantined AS balanced,
       started_at, finished_at, software_version
FROM ingest_ledger
ORDER BY file_id DESC
LIMIT 500;
