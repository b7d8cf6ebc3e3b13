-- name: digest_files
-- One row: a file whose ingest finished in [$start, $end), with its row counts.
SELECT file_id, path, table_name, profile, rows_read, rows_stored, rows_duplicate, rows_quarantined
FROM ingest_ledger
WHERE finished_at >= $start AND finished_at < $end
ORDER BY file_id;
