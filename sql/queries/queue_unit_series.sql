-- name: queue_unit_series
-- One row: a unit's valid check (not aborted or invalid) in the $days_back days before $as_of, with its
-- relative error in percent, the effect of its lot in the latest converged fleet-model fit (the mean lot
-- effect of that fit when the lot is not in it, 0 without a fit) and the model's depletion term
-- d = checks since the last solution change / 100, as the fleet model sees them (sql/queries/model_base.sql);
-- also the lot's verdict and the fit's mean lot effect (what an ordinary lot contributes).
WITH fit AS (
    SELECT fit_id FROM model_fits WHERE converged AND window_end <= $as_of
    ORDER BY window_end DESC, fit_id DESC LIMIT 1
),
mean_effect AS (
    SELECT avg(effect_pct) AS effect_pct FROM lot_effects WHERE fit_id = (SELECT fit_id FROM fit)
)
SELECT r.instrument_id, r.check_id, r.measured_at, r.level, r.lot_id,
       100.0 * r.relative_error AS y,
       coalesce(le.effect_pct, (SELECT effect_pct FROM mean_effect), 0.0) AS lot_effect_pct,
       le.verdict AS lot_verdict,
       coalesce((SELECT effect_pct FROM mean_effect), 0.0) AS mean_lot_effect_pct,
       coalesce(r.checks_since_solution_change, 0) / 100.0 AS d
FROM check_results r
LEFT JOIN lot_effects le ON le.lot_id = r.lot_id AND le.fit_id = (SELECT fit_id FROM fit)
WHERE r.measured_at <= $as_of AND r.measured_at > $as_of - to_days(CAST($days_back AS INTEGER))
  AND r.relative_error IS NOT NULL
  AND coalesce(r.outcome, 'pass') NOT IN ('aborted', 'invalid')
ORDER BY r.instrument_id, r.measured_at, r.check_id;
