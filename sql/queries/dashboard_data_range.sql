-- name: dashboard_data_range
-- One row: first and last check (UTC), number of checks and of units, for every page's header.
-- requires: checks
SELECT min(measured_at) AS first_check_at, max(measured_at) AS last_check_at,
       count(*) AS n_checks, count(DISTINCT instrument_id) AS n_units
FROM checks;
