-- name: model_fits
-- One row: one fit of the fleet mixed model (lot fixed effects, random unit-period intercept
-- and drift, wet-bath depletion, residual variance by technology x level), converged or failed.
CREATE TABLE IF NOT EXISTS model_fits (
    fit_id            BIGINT PRIMARY KEY,
    fitted_at         TIMESTAMP NOT NULL,   -- UTC
    window_start      TIMESTAMP NOT NULL,   -- checks after this (UTC)
    window_end        TIMESTAMP NOT NULL,   -- up to and including this (UTC)
    n_checks          BIGINT NOT NULL,
    n_units           INTEGER NOT NULL,     -- unit-periods in the fit
    n_lots            INTEGER NOT NULL,
    converged         BOOLEAN NOT NULL,     -- FALSE: the fit failed; its estimates are not stored
    boundary          BOOLEAN NOT NULL,     -- a random-effect variance at zero
    warnings          TEXT,                 -- JSON list of strings
    parameters        TEXT,                 -- JSON: settings, fixed effects, theta
    software_version  TEXT NOT NULL,
    duration_s        DOUBLE
);
