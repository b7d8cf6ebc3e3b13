-- name: charts_input
-- One row: a check to chart (control, daily or verification; not aborted or invalid) not yet in
-- chart_points, with its chart segment: baseline period x 1000 + re-baselines since the period began
-- ($with_rebaselines FALSE skips that count when no re-baseline was ever recorded).
SELECT r.check_id, r.instrument_id, r.level, r.measured_at, r.check_type, r.relative_error, r.expected, r.measured,
       coalesce(r.technology, 'unknown') AS technology, coalesce(r.standard_kind, 'unknown') AS standard_kind,
       r.baseline_period * 1000 + CASE WHEN $with_rebaselines THEN
           (SELECT count(*) FROM chart_rebaselines rb
            WHERE rb.instrument_id = r.instrument_id
              AND rb.rebaseline_at <= r.measured_at
              AND rb.rebaseline_at > coalesce(r.baseline_started_at, TIMESTAMP '1900-01-01')) ELSE 0 END
           AS baseline_period
FROM check_results r
WHERE r.check_type IN ('control', 'daily', 'verification')
  AND coalesce(r.outcome, 'pass') NOT IN ('aborted', 'invalid')
  AND r.relative_error IS NOT NULL AND isfinite(r.relative_error)
  AND r.check_id NOT IN (SELECT check_id FROM chart_points)
ORDER BY r.instrument_id, r.level, baseline_period, r.measured_at, r.check_id;
