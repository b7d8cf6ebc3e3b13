-- name: dashboard_unit_levels
-- One row: a level at which unit $instrument_id was checked, with its number of checks and its
-- first and last check. Read from check_results, which its refresh writes in batches of whole
-- units, so a filter on one unit skips most row groups (9 of 87 at 10 million checks); the
-- same filter on checks, stored in ingest order, reads every row group.
-- requires: check_results
SELECT level, count(*) AS n_checks, min(measured_at) AS first_check_at, max(measured_at) AS last_check_at
FROM check_results
WHERE instrument_id = $instrument_id
GROUP BY ALL
ORDER BY n_checks DESC, level;
