-- name: dashboard_funnel_units
-- One row: a unit's mean relative error (percent) at level $level over the last $days days of data,
-- its number of checks and its standardised distance z from the fleet mean, most extreme first
-- ($max_points rows at most). Source: Spiegelhalter (2005), Funnel plots for comparing
-- institutional performance, Statistics in Medicine 24:1185-1202.
-- requires: check_results, checks, instruments
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
           sqrt(sum((n_checks - 1) * coalesce(var_pct, 0)) / nullif(sum(n_checks - 1), 0)) AS sd_pct
    FROM per_unit
)
SELECT p.instrument_id, i.region, i.technology, p.n_checks, p.mean_pct,
       (p.mean_pct - f.target_pct) / nullif(f.sd_pct / sqrt(p.n_checks), 0) AS z
FROM per_unit p CROSS JOIN fleet f
LEFT JOIN instruments i USING (instrument_id)
ORDER BY abs(z) DESC NULLS LAST, p.instrument_id
LIMIT $max_points;
