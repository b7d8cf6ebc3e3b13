-- name: variance_components
-- One row: a variance component of one fit in %^2 (repeatability per technology x level,
-- between units, unit drift, between lots), with a 95 % interval where one is computed.
CREATE TABLE IF NOT EXISTS variance_components (
    fit_id     BIGINT NOT NULL,
    component  TEXT NOT NULL,
    variance   DOUBLE,
    ci_low     DOUBLE,
    ci_high    DOUBLE,
    PRIMARY KEY (fit_id, component)
);
