-- name: dashboard_unit_levels
-- One row: a level at which unit $instrument_id was checked, with its number of checks.
-- requires: checks
SELECT round(target, 3) AS level, count(*) AS n_checks, max(measured_at) AS last_check_at
FROM checks
WHERE instrument_id = $instrument_id
GROUP BY ALL
ORDER BY n_checks DESC, level;
