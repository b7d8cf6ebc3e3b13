-- name: digest_quarantine
-- One row: a quarantine reason with its row count, over files ingested in [$start, $end).
SELECT q.reason, count(*) AS n_rows, count(DISTINCT q.file_id) AS n_files
FROM quarantine q JOIN ingest_ledger l USING (file_id)
WHERE l.finished_at >= $start AND l.finished_at < $end
GROUP BY q.reason
ORDER BY n_rows DESC, q.reason;
