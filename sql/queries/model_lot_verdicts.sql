-- name: model_lot_verdicts
-- One row: a lot of the latest converged fleet-model fit with its effect, interval, verdict and acceptance state.
SELECT e.lot_id, e.standard_kind, e.effect_pct, e.ci_low_pct, e.ci_high_pct, e.n_units, e.n_checks,
       e.verdict, e.verdict_since, a.state AS acceptance, a.decided_at AS acceptance_decided_at, e.fit_id
FROM lot_effects e
LEFT JOIN lot_acceptance a USING (lot_id)
WHERE e.fit_id = (SELECT max(fit_id) FROM model_fits WHERE converged)
ORDER BY abs(e.effect_pct) DESC, e.lot_id;
