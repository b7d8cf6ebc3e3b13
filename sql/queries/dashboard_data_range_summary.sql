-- name: dashboard_data_range_summary
-- One row: what dashboard_data_range gives (first and last check in UTC, numbers of checks and of
-- units), from the summaries of the last main job plus the checks stored since (check_id above
-- its watermark, a short read at the end of the table), so that every page header does not read
-- ten million instrument ids. summary_current is false (or NULL) when there are fewer checks
-- than the summaries counted, i.e. checks were removed since: the page then runs
-- dashboard_data_range instead.
-- requires: summary_state, summary_unit_levels, checks
WITH s AS (
    SELECT checks_through, n_checks, first_check_at, last_check_at FROM summary_state WHERE state_id = 1
),
fresh AS (
    SELECT instrument_id, measured_at FROM checks WHERE check_id > (SELECT checks_through FROM s)
)
SELECT least((SELECT first_check_at FROM s), (SELECT min(measured_at) FROM fresh)) AS first_check_at,
       greatest((SELECT last_check_at FROM s), (SELECT max(measured_at) FROM fresh)) AS last_check_at,
       (SELECT count(*) FROM checks) AS n_checks,
       (SELECT count(*) FROM (SELECT instrument_id FROM summary_unit_levels
                              UNION SELECT instrument_id FROM fresh)) AS n_units,
       (SELECT count(*) FROM checks) >= (SELECT n_checks FROM s) AS summary_current;
