-- name: dashboard_unit_tolerance
-- One row: a unit with its place and whether its latest check at any level failed tolerance
-- (from summary_unit_levels, as of the last main job).
-- requires: summary_unit_levels, instruments
WITH latest AS (
    SELECT instrument_id, bool_or(last_verdict = 'fail') AS out_of_tolerance, max(last_check_at) AS last_check_at
    FROM summary_unit_levels
    GROUP BY instrument_id
)
SELECT i.instrument_id, coalesce(i.region, '(none)') AS region, coalesce(i.site_id, '(none)') AS site_id,
       i.technology, l.out_of_tolerance, l.last_check_at
FROM instruments i
LEFT JOIN latest l USING (instrument_id);
