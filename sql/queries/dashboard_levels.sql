-- name: dashboard_levels
-- One row: a check level (g/210L) in the fleet, with its number of checks (as of the last main job).
-- requires: summary_unit_levels
SELECT level, sum(n_checks) AS n_checks
FROM summary_unit_levels
WHERE level IS NOT NULL
GROUP BY level
ORDER BY n_checks DESC, level;
