-- name: fleet_summary
-- One row: counts over the whole database, for the plain fleet summary.
SELECT
    (SELECT count(*) FROM instruments) AS instruments,
    (SELECT count(*) FROM checks) AS checks,
    (SELECT count(*) FROM lots) AS lots,
    (SELECT count(DISTINCT (file_id, line)) FROM quarantine) AS quarantined_rows,
    (SELECT min(measured_at) FROM checks) AS first_check_at,
    (SELECT max(measured_at) FROM checks) AS last_check_at,
    (SELECT count(*) FROM check_results WHERE verdict = 'fail') AS failing_checks;
