-- name: dashboard_funnel_limits
-- One row: a number of checks n on a log grid (40 steps from 2 to 1.5 x the largest unit) with the
-- fleet mean relative error (percent) and its 95 % and 99.8 % funnel limits
-- target +/- z * sqrt(sd^2 / n + tau^2) at level $level over the last $days days; tau^2 (the
-- unit-to-unit variance beyond chance) only with $overdispersed; also the number of units and tau.
-- Per-unit n, mean and variance come from summary_funnel (the main job, windows ending at the
-- latest check). Source: Spiegelhalter (2005), Statistics in Medicine 24:1185-1202, sections 3 and 6.2.
-- requires: summary_funnel
WITH per_unit AS (
    SELECT instrument_id, n_checks, mean_pct, var_pct
    FROM summary_funnel
    WHERE window_days = $days AND level = $level
),
pooled AS (
    SELECT sum(n_checks * mean_pct) / sum(n_checks) AS target_pct,
           sqrt(sum((n_checks - 1) * coalesce(var_pct, 0)) / nullif(sum(n_checks - 1), 0)) AS sd_pct,
           max(n_checks) AS n_max, count(*) AS n_units
    FROM per_unit
),
dispersion AS (
    SELECT greatest(0, (sum(((u.mean_pct - p.target_pct) / (p.sd_pct / sqrt(u.n_checks))) ^ 2) - (count(*) - 1))
                       / nullif(sum(u.n_checks / p.sd_pct ^ 2)
                                - sum((u.n_checks / p.sd_pct ^ 2) ^ 2) / sum(u.n_checks / p.sd_pct ^ 2), 0)) AS tau2
    FROM per_unit u CROSS JOIN pooled p
),
fleet AS (
    SELECT p.*, CASE WHEN $overdispersed THEN coalesce(d.tau2, 0) ELSE 0 END AS tau2
    FROM pooled p CROSS JOIN dispersion d
),
grid AS (
    SELECT exp(ln(2) + (ln(greatest(1.5 * f.n_max, 3)) - ln(2)) * g / 39.0) AS n
    FROM fleet f, (SELECT unnest(range(0, 40)) AS g)
)
SELECT g.n AS n_checks, f.target_pct, f.n_units, sqrt(f.tau2) AS tau_pct,
       f.target_pct - 1.959964 * sqrt(f.sd_pct ^ 2 / g.n + f.tau2) AS lower95,
       f.target_pct + 1.959964 * sqrt(f.sd_pct ^ 2 / g.n + f.tau2) AS upper95,
       f.target_pct - 3.090232 * sqrt(f.sd_pct ^ 2 / g.n + f.tau2) AS lower998,
       f.target_pct + 3.090232 * sqrt(f.sd_pct ^ 2 / g.n + f.tau2) AS upper998
FROM grid g CROSS JOIN fleet f
WHERE f.sd_pct IS NOT NULL
ORDER BY g.n;
