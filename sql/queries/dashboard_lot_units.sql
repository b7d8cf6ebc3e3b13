-- name: dashboard_lot_units
-- One row: a unit that used lot $lot_id, with how many checks and when; the $listed units with
-- the most checks on the lot, each row carrying the number of units that used it (n_users).
-- requires: checks, instruments
SELECT c.instrument_id, i.region, i.site_id, i.technology, count(*) AS n_checks,
       min(c.measured_at) AS first_used_at, max(c.measured_at) AS last_used_at,
       count(*) OVER () AS n_users
FROM checks c
LEFT JOIN instruments i USING (instrument_id)
WHERE c.lot_id = $lot_id
GROUP BY ALL
ORDER BY n_checks DESC, c.instrument_id
LIMIT $listed;
