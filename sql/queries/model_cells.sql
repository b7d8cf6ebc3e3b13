-- name: model_cells
-- One row: sufficient statistics of one fleet-model cell (unit-period, lot, technology x level):
-- count and sums of t (30-day units since calibration), d (checks since solution change / 100),
-- y (relative error, %), their squares and cross-products; window ($window_start, $window_end].
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
SELECT instrument_id, baseline_period, lot_id, any_value(standard_kind) AS standard_kind, residual_group,
       count(*) AS n, sum(t) AS st, sum(t * t) AS stt, sum(d) AS sd, sum(d * d) AS sdd, sum(t * d) AS std,
       sum(y) AS sy, sum(t * y) AS sty, sum(d * y) AS sdy, sum(y * y) AS syy,
       max(t) AS t_max, max(measured_at) AS last_check_at
FROM base
GROUP BY instrument_id, baseline_period, lot_id, residual_group;
