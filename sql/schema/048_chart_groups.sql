-- name: chart_groups
-- One row: one replicate group (checks of a unit, level and type within a few minutes) with its
-- X-bar and S of standardised values and their limits (sigma known, own group size).
CREATE TABLE IF NOT EXISTS chart_groups (
    check_id       BIGINT PRIMARY KEY,     -- last check of the group
    instrument_id  TEXT NOT NULL,
    level          DOUBLE NOT NULL,
    check_type     TEXT NOT NULL,
    measured_at    TIMESTAMP NOT NULL,
    n              INTEGER NOT NULL,
    xbar           DOUBLE NOT NULL,
    s              DOUBLE NOT NULL,
    xbar_lcl       DOUBLE NOT NULL,
    xbar_ucl       DOUBLE NOT NULL,
    s_lcl          DOUBLE NOT NULL,
    s_ucl          DOUBLE NOT NULL,
    run_id         BIGINT
);
