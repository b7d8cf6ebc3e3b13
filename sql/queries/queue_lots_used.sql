-- name: queue_lots_used
-- One row: a lot a unit checked on in the $window_days before $as_of, with its verdict and effect
-- in the latest converged fit.
WITH fit AS (
    SELECT fit_id FROM model_fits WHERE converged AND window_end <= $as_of
    ORDER BY window_end DESC, fit_id DESC LIMIT 1
)
SELECT c.instrument_id, c.lot_id, count(*) AS n_checks, le.verdict AS lot_verdict, le.effect_pct AS lot_effect_pct
FROM checks c
LEFT JOIN lot_effects le ON le.lot_id = c.lot_id AND le.fit_id = (SELECT fit_id FROM fit)
WHERE c.measured_at <= $as_of AND c.measured_at > $as_of - to_days(CAST($window_days AS INTEGER))
GROUP BY c.instrument_id, c.lot_id, le.verdict, le.effect_pct
ORDER BY c.instrument_id, c.lot_id;
