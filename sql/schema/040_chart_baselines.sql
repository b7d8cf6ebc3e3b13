-- name: chart_baselines
-- One row: one frozen version of the chart baseline of a unit, level and baseline period
-- (version 1: fleet-pooled sigma from the first check; version 2: the unit's own estimate once it
-- has enough checks; later versions only by a recorded re-baseline). Never updated.
CREATE TABLE IF NOT EXISTS chart_baselines (
    baseline_id       BIGINT PRIMARY KEY,
    instrument_id     TEXT NOT NULL,
    level             DOUBLE NOT NULL,       -- g/210L, target rounded to 0.001
    baseline_period   INTEGER NOT NULL,      -- segment: calibration/sensor period, or re-baseline
    version           INTEGER NOT NULL,
    frozen_at         TIMESTAMP NOT NULL,    -- measured_at of the last check that set it (UTC)
    reason            TEXT NOT NULL,         -- period_start | own_estimate | rebaseline: <reason>
    sigma_source      TEXT NOT NULL,         -- fleet_pooled | unit
    center            DOUBLE NOT NULL,       -- relative_error units
    sigma             DOUBLE NOT NULL,       -- relative_error units
    n_checks          BIGINT NOT NULL,       -- checks that set it
    first_check_id    BIGINT,
    last_check_id     BIGINT,
    parameters        TEXT NOT NULL,         -- JSON: designs, rules, methods, settings
    software_version  TEXT NOT NULL
);
