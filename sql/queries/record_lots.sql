-- name: record_lots
-- One row: a lot $instrument_id checked on in [$start, $end), with its certificate and its verdict in the
-- latest converged fleet model fit (the best current knowledge of the lot, also for past periods).
WITH fit AS (
    SELECT fit_id FROM model_fits WHERE converged
    ORDER BY window_end DESC, fit_id DESC LIMIT 1
),
used AS (
    SELECT lot_id, count(*) AS n_checks, min(measured_at) AS first_at, max(measured_at) AS last_at
    FROM checks WHERE instrument_id = $instrument_id AND measured_at >= $start AND measured_at < $end
    GROUP BY lot_id
)
SELECT u.lot_id, l.standard_kind, l.target, l.expanded_uncertainty, l.certified_on, l.expires_on, l.supplier,
       u.n_checks, u.first_at, u.last_at, le.verdict, le.effect_pct, le.ci_low_pct, le.ci_high_pct
FROM used u
LEFT JOIN lots l USING (lot_id)
LEFT JOIN lot_effects le ON le.lot_id = u.lot_id AND le.fit_id = (SELECT fit_id FROM fit)
ORDER BY u.first_at, u.lot_id;
