-- name: standards_budget_checks
-- One row: a check of instrument $instrument_id in the baseline period current at $as_of,
-- measured up to $as_of, usable for its uncertainty budget: no lot or temperature flag and
-- an outcome of pass, fail or none (aborted and invalid runs measured nothing).
WITH current_period AS (
    SELECT max(baseline_period) AS baseline_period
    FROM baseline_periods
    WHERE instrument_id = $instrument_id AND started_at <= $as_of
)
SELECT
    cr.check_id, cr.measured_at, cr.level, cr.check_type, cr.measured, cr.expected_raw, cr.expected,
    cr.error, cr.standard_kind, cr.correction_method, cr.correction_factor,
    cr.simulator_temp_c, cr.pressure_kpa, cr.lot_id,
    l.expanded_uncertainty AS lot_expanded_uncertainty,
    cr.baseline_period, cr.baseline_started_at
FROM check_results cr
JOIN current_period cp ON cr.baseline_period = cp.baseline_period
LEFT JOIN lots l ON l.lot_id = cr.lot_id
WHERE cr.instrument_id = $instrument_id
  AND cr.measured_at <= $as_of
  AND NOT (cr.lot_expired OR cr.lot_wrong_kind OR cr.lot_before_certified OR cr.temp_out_of_window)
  AND coalesce(cr.outcome, 'pass') IN ('pass', 'fail')
ORDER BY cr.level, cr.measured_at, cr.check_id;
