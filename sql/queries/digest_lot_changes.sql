-- name: digest_lot_changes
-- One row: a lot whose verdict in the latest converged fit before $end differs from the previous fit's
-- (or is new), or whose verdict took effect in [$start, $end).
WITH fits AS (
    SELECT fit_id, row_number() OVER (ORDER BY window_end DESC, fit_id DESC) AS k
    FROM model_fits WHERE converged AND window_end < $end
),
cur AS (SELECT le.* FROM lot_effects le JOIN fits f ON f.fit_id = le.fit_id AND f.k = 1),
prev AS (SELECT le.* FROM lot_effects le JOIN fits f ON f.fit_id = le.fit_id AND f.k = 2)
SELECT c.lot_id, c.standard_kind, p.verdict AS previous_verdict, c.verdict, c.effect_pct, c.ci_low_pct,
       c.ci_high_pct, c.n_units, c.n_checks, c.verdict_since
FROM cur c LEFT JOIN prev p USING (lot_id)
WHERE (p.verdict IS NOT NULL AND p.verdict <> c.verdict)
   OR (c.verdict_since >= CAST($start AS DATE) AND c.verdict_since < CAST($end AS DATE))
ORDER BY c.lot_id;
