-- name: quarantine_rows
-- One row: one quarantined problem with its file path, optionally of one reason ($reason NULL = all).
SELECT l.path, q.file_id, q.line, q.field, q.value, q.reason, q.message, q.raw_line
FROM quarantine q JOIN ingest_ledger l USING (file_id)
WHERE $reason IS NULL OR q.reason = $reason
ORDER BY q.file_id, q.line, q.field
