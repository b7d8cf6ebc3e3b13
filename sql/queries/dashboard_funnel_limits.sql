-- name: dashboard_funnel_limits
-- One row: a number of checks n on a log grid (40 steps) with the fleet mean relative error (percent)
-- and its 95 % and 99.8 % funnel limits target +/- z * sd / sqrt(n), at level $level over the last
-- $days days; also the number of units. Source: Spiegelhalter (2005), Statistics in Medicine 24:1185-1202.
-- requires: check_results, checks
WITH recent AS (
    SELECT instrument_id, relative_error * 100 AS re_pct
    FROM check_results
    WHERE level = $level AND relative_error IS NOT NULL
      AND measured_at >= (SELECT max(measured_at) FROM checks) - to_days(CAST($days AS INTEGER))
),
per_unit AS (
    SELECT instrument_id, count(*) AS n_checks, avg(re_pct) AS mean_pct, var_samp(re_pct) AS var_pct
    FROM recent GROUP BY instrument_id
),
fleet AS (
    SELECT sum(n_checks * mean_pct) / sum(n_checks) AS target_pct,
           sqrt(sum((n_checks - 1) * coalesce(var_pct, 0)) / nullif(sum(n_checks - 1), 0)) AS sd_pct,
           min(n_checks) AS n_min, max(n_checks) AS n_max, count(*) AS n_units
    FROM per_unit
),
grid AS (
    SELECT exp(ln(greatest(f.n_min, 2)) + (ln(greatest(f.n_max, 3)) - ln(greatest(f.n_min, 2))) * g / 39.0) AS n
    FROM fleet f, (SELECT unnest(range(0, 40)) AS g)
)
SELECT g.n AS n_checks, f.target_pct, f.n_units,
       f.target_pct - 1.959964 * f.sd_pct / sqrt(g.n) AS lower95,
       f.target_pct + 1.959964 * f.sd_pct / sqrt(g.n) AS upper95,
       f.target_pct - 3.090232 * f.sd_pct / sqrt(g.n) AS lower998,
       f.target_pct + 3.090232 * f.sd_pct / sqrt(g.n) AS upper998
FROM grid g CROSS JOIN fleet f
WHERE f.sd_pct IS NOT NULL
ORDER BY g.n;
