-- name: model_sample
-- One row: a check of the fleet-model window in a reproducible pseudo-random sample of
-- $sample_size rows (smallest hashes), for residual diagnostics.
WITH base AS (
    SELECT instrument_id, baseline_period, lot_id, standard_kind, measured_at,
           coalesce(technology, 'unknown') || ' @ ' || CAST(level AS TEXT) AS residual_group,
           100.0 * relative_error AS y,
           epoch(measured_at - CASE WHEN baseline_period = 0 THEN
                     min(measured_at) OVER (PARTITION BY instrument_id, baseline_period)
                 ELSE baseline_started_at END) / (86400.0 * 30.0) AS t,
           coalesce(checks_since_solution_change, 0) / 100.0 AS d
    FROM check_results
    WHERE measured_at > $window_start AND measured_at <= $window_end
      AND relative_error IS NOT NULL AND lot_id IS NOT NULL
      AND coalesce(outcome, 'pass') NOT IN ('aborted', 'invalid')
)
SELECT instrument_id, baseline_period, lot_id, residual_group, measured_at, y, t, d
FROM base
ORDER BY hash(instrument_id, measured_at, lot_id, y)
LIMIT $sample_size;
