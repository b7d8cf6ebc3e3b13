-- name: chart_linearity
-- One row: the linearity fit of one multi-level verification session of a unit (measured vs
-- expected, OLS with 95 % t intervals) with its proportional and constant bias flags.
CREATE TABLE IF NOT EXISTS chart_linearity (
    instrument_id      TEXT NOT NULL,
    started_at         TIMESTAMP NOT NULL,
    ended_at           TIMESTAMP NOT NULL,
    n_checks           INTEGER NOT NULL,
    n_levels           INTEGER NOT NULL,
    slope              DOUBLE,
    slope_low          DOUBLE,
    slope_high         DOUBLE,
    intercept          DOUBLE,            -- g/210L
    intercept_low      DOUBLE,
    intercept_high     DOUBLE,
    residual_sd        DOUBLE,
    proportional_bias  BOOLEAN,           -- slope interval excludes 1
    constant_bias      BOOLEAN,           -- intercept interval excludes 0
    run_id             BIGINT,
    PRIMARY KEY (instrument_id, started_at)
);
