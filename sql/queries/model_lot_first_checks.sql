-- name: model_lot_first_checks
-- One row: one of the first $max_checks checks made on a lot across the fleet (all time, in time
-- order), with what the new-lot acceptance rule needs to remove the unit's own bias.
WITH base AS (
    SELECT lot_id, instrument_id, baseline_period, measured_at, check_id,
           coalesce(technology, 'unknown') || ' @ ' || CAST(level AS TEXT) AS residual_group,
           100.0 * relative_error AS y,
           epoch(measured_at - CASE WHEN baseline_period = 0 THEN
                     min(measured_at) OVER (PARTITION BY instrument_id, baseline_period)
                 ELSE baseline_started_at END) / (86400.0 * 30.0) AS t,
           coalesce(checks_since_solution_change, 0) / 100.0 AS d
    FROM check_results
    WHERE relative_error IS NOT NULL AND lot_id IS NOT NULL AND measured_at <= $window_end
      AND coalesce(outcome, 'pass') NOT IN ('aborted', 'invalid')
),
ranked AS (
    SELECT *, row_number() OVER (PARTITION BY lot_id ORDER BY measured_at, check_id) AS seq FROM base
)
SELECT lot_id, instrument_id, baseline_period, measured_at, residual_group, y, t, d, seq
FROM ranked WHERE seq <= $max_checks
ORDER BY lot_id, seq;
