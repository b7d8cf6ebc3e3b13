-- name: dashboard_quarantine_reasons
-- One row: a quarantine reason with the number of problems, of distinct rows and of files.
-- requires: quarantine
SELECT reason, count(*) AS n_problems, count(DISTINCT (file_id, line)) AS n_rows,
       count(DISTINCT file_id) AS n_files
FROM quarantine
GROUP BY reason
ORDER BY n_rows DESC, reason;
