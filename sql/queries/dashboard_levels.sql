-- name: dashboard_levels
-- One row: a check level (g/210L) in the fleet, with its number of checks.
-- requires: checks
SELECT round(target, 3) AS level, count(*) AS n_checks
FROM checks
GROUP BY ALL
ORDER BY n_checks DESC, level;
