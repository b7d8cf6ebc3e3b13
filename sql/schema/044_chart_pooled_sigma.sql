-- name: chart_pooled_sigma
-- One row: the fleet's frozen pooled repeatability (relative_error sigma, MR-bar / d2) for a
-- technology, standard kind and level; the sigma of short-run charts before a unit's own baseline.
CREATE TABLE IF NOT EXISTS chart_pooled_sigma (
    technology      TEXT NOT NULL,
    standard_kind   TEXT NOT NULL,
    level           DOUBLE NOT NULL,
    sigma           DOUBLE NOT NULL,
    n_pairs         BIGINT NOT NULL,
    frozen_at       TIMESTAMP NOT NULL,
    method          TEXT NOT NULL,
    PRIMARY KEY (technology, standard_kind, level)
);
