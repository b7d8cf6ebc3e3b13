-- name: dashboard_lot_effects
-- One row: a lot's estimated effect (percent) with its interval and verdict from the latest converged fleet model.
-- requires: lot_effects, model_fits
SELECT e.lot_id, e.standard_kind, e.effect_pct, e.ci_low_pct, e.ci_high_pct, e.n_units, e.n_checks,
       e.verdict, e.verdict_since, f.fitted_at
FROM lot_effects e
JOIN model_fits f USING (fit_id)
WHERE e.fit_id = (SELECT fit_id FROM model_fits WHERE converged ORDER BY fitted_at DESC LIMIT 1)
ORDER BY e.effect_pct;
