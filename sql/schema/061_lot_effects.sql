-- name: lot_effects
-- One row: a lot's effect (its bias against its certificate, percent) in one fit, with a
-- Wald 95 % interval from the GLS covariance and the lot verdict.
CREATE TABLE IF NOT EXISTS lot_effects (
    fit_id         BIGINT NOT NULL,
    lot_id         TEXT NOT NULL,
    standard_kind  TEXT,
    effect_pct     DOUBLE NOT NULL,
    ci_low_pct     DOUBLE NOT NULL,
    ci_high_pct    DOUBLE NOT NULL,
    n_units        INTEGER NOT NULL,     -- distinct instruments that checked on the lot in the window
    n_checks       BIGINT NOT NULL,
    verdict        TEXT NOT NULL,        -- agrees, watch, off
    verdict_since  DATE,                 -- window-end date of the first consecutive fit with this verdict
    PRIMARY KEY (fit_id, lot_id)
);
