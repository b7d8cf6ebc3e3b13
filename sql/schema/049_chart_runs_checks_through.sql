-- name: chart_runs.checks_through
-- The highest check_id a chart run considered, and how many checks had an id at or below it:
-- the next run reads only checks above it (plus units whose points were removed to chart them
-- again), unless the count no longer matches (checks inserted below it), when it reads all.
ALTER TABLE chart_runs ADD COLUMN IF NOT EXISTS checks_through BIGINT;
ALTER TABLE chart_runs ADD COLUMN IF NOT EXISTS checks_counted BIGINT;
