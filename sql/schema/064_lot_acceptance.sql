-- name: lot_acceptance
-- One row: a lot's new-lot acceptance state by Wald's two-sided SPRT on its first checks
-- across the fleet, adjusted for each unit's own estimated bias; rewritten by every model run.
CREATE TABLE IF NOT EXISTS lot_acceptance (
    lot_id      TEXT PRIMARY KEY,
    state       TEXT NOT NULL,      -- pending, accepted, rejected
    decided_at  TIMESTAMP,          -- UTC time of the check that decided; NULL while pending
    n_checks    BIGINT NOT NULL,    -- checks used (up to the decision)
    statistic   DOUBLE,             -- the larger one-sided log likelihood ratio at the stop
    parameters  TEXT                -- JSON: delta, alpha, beta, bounds, fit_id
);
