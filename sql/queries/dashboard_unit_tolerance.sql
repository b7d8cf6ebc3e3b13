-- name: dashboard_unit_tolerance
-- One row: a unit with its place and whether its latest check at any level failed tolerance.
-- requires: check_results, instruments
WITH latest AS (
    SELECT instrument_id, level, arg_max(verdict, measured_at) AS last_verdict,
           max(measured_at) AS last_check_at
    FROM check_results
    GROUP BY instrument_id, level
)
SELECT i.instrument_id, coalesce(i.region, '(none)') AS region, coalesce(i.site_id, '(none)') AS site_id,
       i.technology,
       bool_or(l.last_verdict = 'fail') AS out_of_tolerance,
       max(l.last_check_at) AS last_check_at
FROM instruments i
LEFT JOIN latest l USING (instrument_id)
GROUP BY ALL;
