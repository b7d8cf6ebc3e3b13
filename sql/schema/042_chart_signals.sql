-- name: chart_signals
-- One row: one signal of one chart of a unit and level at a check, with the estimated onset of
-- the change (CUSUM: Page's last-zero estimator) and the control checks run since then.
CREATE TABLE IF NOT EXISTS chart_signals (
    signal_id          BIGINT PRIMARY KEY,
    instrument_id      TEXT NOT NULL,
    level              DOUBLE NOT NULL,
    check_id           BIGINT NOT NULL,
    measured_at        TIMESTAMP NOT NULL,
    chart              TEXT NOT NULL,      -- individuals | moving_range | cusum | ewma | xbar | s
    rule               TEXT NOT NULL,      -- WE1..WE4, N1..N8, h, limit
    direction          TEXT NOT NULL,      -- up | down
    size               DOUBLE NOT NULL,    -- the statistic at the signal (sigma units)
    onset_at           TIMESTAMP,
    impact_checks      BIGINT,             -- control checks of the unit from onset_at to the signal
    p_value            DOUBLE,             -- in-control probability of a signal this early
    fleet_significant  BOOLEAN,            -- Benjamini-Hochberg over the run's signals
    run_id             BIGINT,
    created_at         TIMESTAMP NOT NULL
);
