-- name: chart tables leaner to write
-- Storing a full run's 9.3 million points and 1.5 million signals was a third of the chart
-- engine's time. chart_points drops four columns that held the same value in every row, or one
-- the row has already: ewma_lcl (always -ewma_ucl; readers compute it) and the individuals and
-- moving-range limits (z units, the same for every point: chart_runs records the limits each run
-- used). chart_signals loses its primary-key index: analyse alone writes signals, under DuckDB's
-- single-writer lock, and numbers them max(signal_id) + 1 onwards (tests/test_analyse.py checks
-- they stay unique). Same columns as before (nullable now: analyse writes every
-- field, and tests/test_analyse.py reads them back).
ALTER TABLE chart_runs ADD COLUMN IF NOT EXISTS ind_lcl DOUBLE;   -- individuals limits, z units
ALTER TABLE chart_runs ADD COLUMN IF NOT EXISTS ind_ucl DOUBLE;
ALTER TABLE chart_runs ADD COLUMN IF NOT EXISTS mr_ucl DOUBLE;    -- moving-range upper limit, z units
UPDATE chart_runs SET ind_lcl = l.ind_lcl, ind_ucl = l.ind_ucl, mr_ucl = l.mr_ucl
FROM (SELECT min(ind_lcl) AS ind_lcl, max(ind_ucl) AS ind_ucl, max(mr_ucl) AS mr_ucl FROM chart_points) l;
ALTER TABLE chart_points DROP COLUMN ewma_lcl;
ALTER TABLE chart_points DROP COLUMN ind_lcl;
ALTER TABLE chart_points DROP COLUMN ind_ucl;
ALTER TABLE chart_points DROP COLUMN mr_ucl;
CREATE TABLE chart_signals_101 AS SELECT * FROM chart_signals;  -- same columns, no constraints
DROP TABLE chart_signals;
ALTER TABLE chart_signals_101 RENAME TO chart_signals;
