-- name: charts_input
-- One row: a check to chart (control, daily or verification; not aborted or invalid) not yet in
-- chart_points, with its chart segment: baseline period x 1000 + re-baselines since the period began.
-- pipeline/charts/analyse.py fills in the segment offset: the query charts_segment_offset.sql when a
-- re-baseline was ever recorded, else 0 (DuckDB would join 10 million rows for an empty count).
-- Names come back as integer codes into the small temp tables _bf_units, _bf_technologies and
-- _bf_kinds that pipeline/charts/analyse.py creates (millions of strings are the slow part of a read).
-- $through: checks with a check_id at or below it are charted already, except those of the units
-- in _bf_recharge (their points were removed to chart them again). The two are read as separate
-- branches so that the check_id condition can skip the stored row groups below $through.
-- Codes come back as the narrowest integers (less to convert for millions of rows); no column is
-- NULL (analyse streams the result into numpy arrays: pipeline.db.fetch_arrays). The expected
-- and measured values of verification checks are read apart (charts_verification_values.sql).
WITH picked AS (
    SELECT * FROM check_results WHERE check_id > $through
    UNION ALL
    SELECT * FROM check_results
    WHERE check_id <= $through AND instrument_id IN (SELECT instrument_id FROM _bf_recharge)
), charted AS (
    SELECT check_id FROM chart_point_values WHERE check_id > $through
    UNION ALL
    SELECT check_id FROM chart_points
    WHERE check_id <= $through AND instrument_id IN (SELECT instrument_id FROM _bf_recharge)
)
SELECT r.check_id, u.unit_code, r.level, r.measured_at,
       CAST(CASE r.check_type WHEN 'control' THEN 0 WHEN 'daily' THEN 1 ELSE 2 END AS TINYINT) AS check_type_code,
       r.relative_error,
       CAST(t.code AS SMALLINT) AS technology_code, CAST(k.code AS SMALLINT) AS kind_code,
       CAST(r.baseline_period * 1000 + {segment_offset} AS INTEGER) AS baseline_period
FROM picked r
JOIN _bf_units u ON u.instrument_id = r.instrument_id
JOIN _bf_technologies t ON t.name = coalesce(r.technology, 'unknown')
JOIN _bf_kinds k ON k.name = coalesce(r.standard_kind, 'unknown')
WHERE r.check_type IN ('control', 'daily', 'verification')
  AND coalesce(r.outcome, 'pass') NOT IN ('aborted', 'invalid')
  AND r.relative_error IS NOT NULL AND isfinite(r.relative_error)
  AND r.level IS NOT NULL AND r.measured_at IS NOT NULL  -- never NULL from ingest; a chart needs both
  AND r.check_id NOT IN (SELECT check_id FROM charted)
ORDER BY u.unit_code, r.level, baseline_period, r.measured_at, r.check_id;
