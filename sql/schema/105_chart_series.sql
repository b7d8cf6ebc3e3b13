-- name: chart series (chart_points split into chart_series and chart_point_values)
-- A chart series is one unit, level and baseline segment. Each point used to repeat the series'
-- three key columns; storing a fleet's 9.3 million points spent 0.6-0.7 CPU-s on the unit's name
-- alone. Points now carry a small series_id, and the view chart_points (sql/views/chart_points.sql)
-- joins the key back, with the same columns as before, for every reader. Writers: analyse
-- (pipeline/charts/dimensions.py numbers new series) and the deletes of late data and re-baselines.
CREATE TABLE chart_series (
    series_id        INTEGER NOT NULL,
    instrument_id    TEXT NOT NULL,
    level            DOUBLE NOT NULL,
    baseline_period  INTEGER NOT NULL
);
INSERT INTO chart_series
SELECT CAST(row_number() OVER (ORDER BY instrument_id, level, baseline_period) AS INTEGER),
       instrument_id, level, baseline_period
FROM (SELECT DISTINCT instrument_id, level, baseline_period FROM chart_points);
-- One row: one charted check's standardised value and chart statistics (z units, sigma 1).
CREATE TABLE chart_point_values (
    check_id         BIGINT NOT NULL,
    series_id        INTEGER NOT NULL,
    measured_at      TIMESTAMP NOT NULL,
    position         INTEGER NOT NULL,    -- 1-based check number in the series
    relative_error   DOUBLE NOT NULL,     -- the value charted
    z                DOUBLE NOT NULL,     -- (relative_error - center) / sigma
    moving_range     DOUBLE,
    cusum_upper      DOUBLE NOT NULL,
    cusum_lower      DOUBLE NOT NULL,
    ewma             DOUBLE NOT NULL,
    ewma_ucl         DOUBLE NOT NULL,     -- exact limit; the lower one is its negation
    center           DOUBLE NOT NULL,     -- relative_error units (running mean during the Q phase)
    sigma            DOUBLE NOT NULL,     -- relative_error units (effective Q scale during the Q phase)
    own_sigma        BOOLEAN              -- true: the series' own frozen baseline; false: Q phase
);
INSERT INTO chart_point_values
SELECT p.check_id, s.series_id, p.measured_at, p.position, p.relative_error, p.z, p.moving_range, p.cusum_upper,
       p.cusum_lower, p.ewma, p.ewma_ucl, p.center, p.sigma, p.own_sigma
FROM chart_points p JOIN chart_series s USING (instrument_id, level, baseline_period)
ORDER BY s.series_id, p.position;
DROP TABLE chart_points;
