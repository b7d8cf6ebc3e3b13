-- name: chart_baselines.run_id
-- A baseline records the chart run that froze it, and its parameters are that run's
-- (chart_runs.parameters): stored once per run instead of once per baseline. 1.2 kB of JSON
-- repeated for the 79,000 baselines of a full fleet run was 97 MB of write-ahead log and about
-- half a second of commit. Baselines frozen before this change keep their own copy in
-- `parameters` (NULL in later rows); readers take coalesce(b.parameters, r.parameters).
ALTER TABLE chart_baselines ADD COLUMN IF NOT EXISTS run_id BIGINT;
ALTER TABLE chart_baselines ALTER COLUMN parameters DROP NOT NULL;
