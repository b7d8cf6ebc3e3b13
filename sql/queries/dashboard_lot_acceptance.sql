-- name: dashboard_lot_acceptance
-- One row: a lot's acceptance state (pending, accepted, rejected) and when it was decided.
-- requires: lot_acceptance
SELECT lot_id, state, decided_at, n_checks AS acceptance_checks, statistic
FROM lot_acceptance
ORDER BY lot_id;
