-- name: chart_points (without a primary key)
-- The primary-key index on check_id cost 40 % of storing a fleet's points; analyse keeps one
-- point per check itself (it charts only checks missing from chart_points). Same columns as 041.
CREATE TABLE chart_points_050 (
    check_id         BIGINT NOT NULL,
    instrument_id    TEXT NOT NULL,
    level            DOUBLE NOT NULL,
    baseline_period  INTEGER NOT NULL,
    measured_at      TIMESTAMP NOT NULL,
    position         INTEGER NOT NULL,    -- 1-based check number in the segment
    relative_error   DOUBLE NOT NULL,
    z                DOUBLE NOT NULL,     -- (relative_error - center) / sigma
    moving_range     DOUBLE,
    cusum_upper      DOUBLE NOT NULL,
    cusum_lower      DOUBLE NOT NULL,
    ewma             DOUBLE NOT NULL,
    ewma_lcl         DOUBLE NOT NULL,
    ewma_ucl         DOUBLE NOT NULL,
    center           DOUBLE NOT NULL,     -- relative_error units (running mean during the Q phase)
    sigma            DOUBLE NOT NULL,     -- relative_error units (effective Q scale during the Q phase)
    sigma_source     TEXT NOT NULL,       -- fleet_pooled | unit
    ind_lcl          DOUBLE NOT NULL,
    ind_ucl          DOUBLE NOT NULL,
    mr_ucl           DOUBLE NOT NULL,
    cusum_upper_run  INTEGER NOT NULL,    -- checks since C+ was last zero (N+)
    cusum_lower_run  INTEGER NOT NULL     -- checks since C- was last zero (N-)
);
INSERT INTO chart_points_050 SELECT * FROM chart_points;
DROP TABLE chart_points;
ALTER TABLE chart_points_050 RENAME TO chart_points;
