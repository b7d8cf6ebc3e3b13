-- name: dashboard_lot_usage
-- One row: a certified lot with how many checks and units used it, and when (usage from
-- summary_lots, as of the last main job).
-- requires: lots, summary_lots
SELECT l.lot_id, l.standard_kind, l.target, l.expanded_uncertainty, l.certified_on, l.expires_on,
       l.supplier, coalesce(s.n_checks, 0) AS n_checks, coalesce(s.n_units, 0) AS n_units,
       s.first_used_at, s.last_used_at
FROM lots l
LEFT JOIN summary_lots s USING (lot_id)
ORDER BY l.lot_id;
