-- name: dashboard_silent_units
-- One row: a unit with no check in the last $days days of data (or never), with its last check.
-- requires: checks, instruments
WITH last AS (SELECT instrument_id, max(measured_at) AS last_check_at FROM checks GROUP BY instrument_id),
data_end AS (SELECT max(measured_at) AS end_at FROM checks)
SELECT i.instrument_id, i.region, i.site_id, i.technology, l.last_check_at,
       date_diff('day', l.last_check_at, d.end_at) AS days_silent
FROM instruments i
LEFT JOIN last l USING (instrument_id)
CROSS JOIN data_end d
WHERE l.last_check_at IS NULL OR l.last_check_at < d.end_at - to_days(CAST($days AS INTEGER))
ORDER BY l.last_check_at NULLS FIRST, i.instrument_id;
