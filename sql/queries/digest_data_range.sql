-- name: digest_data_range
-- One row: the first and last check time (UTC) and the number of checks in the database.
SELECT min(measured_at) AS first_check_at, max(measured_at) AS last_check_at, count(*) AS n_checks FROM checks;
