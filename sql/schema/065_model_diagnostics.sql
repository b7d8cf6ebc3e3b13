-- name: model_diagnostics
-- One row: one diagnostic of a fit (convergence, boundary, residual normality, residual
-- trend against time), its value and whether it passed, with a sentence saying what it means.
CREATE TABLE IF NOT EXISTS model_diagnostics (
    fit_id      BIGINT NOT NULL,
    diagnostic  TEXT NOT NULL,
    value       DOUBLE,
    passed      BOOLEAN NOT NULL,
    message     TEXT NOT NULL,
    PRIMARY KEY (fit_id, diagnostic)
);
