-- name: dashboard_quarantine_sample
-- One row: one of up to 50 quarantined problems with reason $reason, with its file name.
-- requires: quarantine, ingest_ledger
SELECT l.path, q.line, q.field, q.value, q.reason, q.message, q.raw_line
FROM quarantine q
LEFT JOIN ingest_ledger l USING (file_id)
WHERE q.reason = $reason
ORDER BY q.file_id, q.line
LIMIT 50;
