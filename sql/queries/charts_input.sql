-- name: charts_input
-- One row: a check to chart (control, daily or verification; not aborted or invalid) not yet in
-- chart_points, with its chart segment: baseline period x 1000 + re-baselines since the period began.
-- pipeline/charts/analyse.py fills in the segment offset: the query charts_segment_offset.sql when a
-- re-baseline was ever recorded, else 0 (DuckDB would join 10 million rows for an empty count).
-- Names come back as integer codes into the small temp tables _bf_units, _bf_technologies and
-- _bf_kinds that pipeline/charts/analyse.py creates (millions of strings are the slow part of a read).
-- $through: checks with a check_id at or below it are charted already, except those of the units
-- in _bf_recharge (their points were removed to chart them again).
-- Codes come back as the narrowest integers (less to convert for millions of rows).
SELECT r.check_id, u.unit_code, r.level, r.measured_at,
       CAST(CASE r.check_type WHEN 'control' THEN 0 WHEN 'daily' THEN 1 ELSE 2 END AS TINYINT) AS check_type_code,
       r.relative_error, r.expected, r.measured,
       CAST(t.code AS SMALLINT) AS technology_code, CAST(k.code AS SMALLINT) AS kind_code,
       CAST(r.baseline_period * 1000 + {segment_offset} AS INTEGER) AS baseline_period
FROM check_results r
JOIN _bf_units u ON u.instrument_id = r.instrument_id
JOIN _bf_technologies t ON t.name = coalesce(r.technology, 'unknown')
JOIN _bf_kinds k ON k.name = coalesce(r.standard_kind, 'unknown')
WHERE r.check_type IN ('control', 'daily', 'verification')
  AND coalesce(r.outcome, 'pass') NOT IN ('aborted', 'invalid')
  AND r.relative_error IS NOT NULL AND isfinite(r.relative_error)
  AND (r.check_id > $through OR r.instrument_id IN (SELECT instrument_id FROM _bf_recharge))
  AND r.check_id NOT IN (SELECT p.check_id FROM chart_points p
                         WHERE p.check_id > $through OR p.instrument_id IN (SELECT instrument_id FROM _bf_recharge))
ORDER BY u.unit_code, r.level, baseline_period, r.measured_at, r.check_id;
