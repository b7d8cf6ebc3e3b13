-- name: chart signal kinds (chart_signals split into chart_signal_kinds and chart_signal_values)
-- A signal kind is one chart, rule and direction. A full run stores about 1.5 million signals, and
-- their three names cost 0.11 CPU-s each to store (DuckDB's string dictionary compression). Signals
-- now carry a small kind number, and the view chart_signals (sql/views/chart_signals.sql) joins
-- the names back, with the same columns as before, for every reader. Writers: analyse
-- (pipeline/charts/dimensions.py numbers new kinds) and the deletes of late data and re-baselines.
CREATE TABLE chart_signal_kinds (
    kind       SMALLINT NOT NULL,
    chart      TEXT NOT NULL,      -- individuals | moving_range | cusum | ewma | xbar | s
    rule       TEXT NOT NULL,      -- WE1..WE4, N1..N8, h, limit
    direction  TEXT NOT NULL       -- up | down
);
INSERT INTO chart_signal_kinds
SELECT CAST(row_number() OVER (ORDER BY chart, rule, direction) AS SMALLINT), chart, rule, direction
FROM (SELECT DISTINCT chart, rule, direction FROM chart_signals);
-- One row: one signal of one chart of a unit and level at a check, with the estimated onset of
-- the change (CUSUM: Page's last-zero estimator) and the control checks run since then.
CREATE TABLE chart_signal_values (
    signal_id          BIGINT NOT NULL,
    instrument_id      TEXT NOT NULL,
    level              DOUBLE NOT NULL,
    check_id           BIGINT NOT NULL,
    measured_at        TIMESTAMP NOT NULL,
    kind               SMALLINT NOT NULL,
    size               DOUBLE NOT NULL,    -- the statistic at the signal (sigma units)
    onset_at           TIMESTAMP,
    impact_checks      BIGINT,             -- control checks of the unit from onset_at to the signal
    p_value            DOUBLE,             -- in-control probability of a signal this early
    fleet_significant  BOOLEAN,            -- Benjamini-Hochberg over the run's signals
    run_id             BIGINT,
    created_at         TIMESTAMP NOT NULL
);
INSERT INTO chart_signal_values
SELECT s.signal_id, s.instrument_id, s.level, s.check_id, s.measured_at, k.kind, s.size, s.onset_at,
       s.impact_checks, s.p_value, s.fleet_significant, s.run_id, s.created_at
FROM chart_signals s JOIN chart_signal_kinds k USING (chart, rule, direction)
ORDER BY s.signal_id;
DROP TABLE chart_signals;
