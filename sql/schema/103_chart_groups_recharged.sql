-- name: chart_groups (without a primary key)
-- A replicate group is removed with its checks' points when they are charted again (a re-baseline
-- or late data: pipeline/charts/baselines.py, analyse.py) and stored anew from the new z. Before,
-- the key on check_id kept the group computed from the old baseline (INSERT OR IGNORE), and its
-- index cost about 0.3 s of a full fleet run. Same columns (nullable now: analyse
-- writes every field).
CREATE TABLE chart_groups_103 AS SELECT * FROM chart_groups;  -- same columns, no constraints
DROP TABLE chart_groups;
ALTER TABLE chart_groups_103 RENAME TO chart_groups;
