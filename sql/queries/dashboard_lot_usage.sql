-- name: dashboard_lot_usage
-- One row: a certified lot with how many checks and units used it, and when.
-- requires: lots, checks
SELECT l.lot_id, l.standard_kind, l.target, l.expanded_uncertainty, l.certified_on, l.expires_on,
       l.supplier, count(c.check_id) AS n_checks, count(DISTINCT c.instrument_id) AS n_units,
       min(c.measured_at) AS first_used_at, max(c.measured_at) AS last_used_at
FROM lots l
LEFT JOIN checks c USING (lot_id)
GROUP BY ALL
ORDER BY l.lot_id;
