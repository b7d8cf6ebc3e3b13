-- name: dashboard_funnel_units
-- One row: a unit's mean relative error (percent) at level $level over the last $days days of data,
-- its number of checks and its standardised distance z from the fleet mean, most extreme first
-- ($max_points rows at most). With $overdispersed, the unit-to-unit variance tau^2 beyond chance is
-- added to each unit's sampling variance (additive random-effects adjustment, moment estimate).
-- Per-unit n, mean and variance come from summary_funnel (the main job, windows ending at the
-- latest check). Source: Spiegelhalter (2005), Funnel plots for comparing institutional performance,
-- Statistics in Medicine 24:1185-1202, sections 3 and 6.2.
-- requires: summary_funnel, instruments
WITH per_unit AS (
    SELECT instrument_id, n_checks, mean_pct, var_pct
    FROM summary_funnel
    WHERE window_days = $days AND level = $level
),
pooled AS (
    SELECT sum(n_checks * mean_pct) / sum(n_checks) AS target_pct,
           sqrt(sum((n_checks - 1) * coalesce(var_pct, 0)) / nullif(sum(n_checks - 1), 0)) AS sd_pct,
           count(*) AS n_units
    FROM per_unit
),
dispersion AS (
    SELECT greatest(0, (sum(((u.mean_pct - p.target_pct) / (p.sd_pct / sqrt(u.n_checks))) ^ 2) - (count(*) - 1))
                       / nullif(sum(u.n_checks / p.sd_pct ^ 2)
                                - sum((u.n_checks / p.sd_pct ^ 2) ^ 2) / sum(u.n_checks / p.sd_pct ^ 2), 0)) AS tau2
    FROM per_unit u CROSS JOIN pooled p
)
SELECT u.instrument_id, i.region, i.technology, u.n_checks, u.mean_pct,
       (u.mean_pct - p.target_pct)
         / nullif(sqrt(p.sd_pct ^ 2 / u.n_checks + CASE WHEN $overdispersed THEN coalesce(d.tau2, 0) ELSE 0 END), 0) AS z
FROM per_unit u CROSS JOIN pooled p CROSS JOIN dispersion d
LEFT JOIN instruments i USING (instrument_id)
ORDER BY abs(z) DESC NULLS LAST, u.instrument_id
LIMIT $max_points;
