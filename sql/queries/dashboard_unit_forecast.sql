-- name: dashboard_unit_forecast
-- One row: a day ahead (0..$horizon_days in 15-day steps) of the linear projection of unit
-- $instrument_id's bias (percent) from its latest baseline period, with a 95 % band
-- (delta method over bias, drift and their covariance from the fleet model).
-- requires: unit_estimates, model_fits
WITH est AS (
    SELECT bias_pct, drift_pct_per_30d, reference_at,
           (bias_ci_high_pct - bias_ci_low_pct) / (2 * 1.959964) AS se_bias,
           (drift_ci_high - drift_ci_low) / (2 * 1.959964) AS se_drift,
           coalesce(bias_drift_cov, 0) AS cov
    FROM unit_estimates
    WHERE instrument_id = $instrument_id
      AND fit_id = (SELECT fit_id FROM model_fits WHERE converged ORDER BY fitted_at DESC LIMIT 1)
    ORDER BY baseline_period DESC
    LIMIT 1
),
steps AS (SELECT unnest(range(0, CAST($horizon_days AS INTEGER) + 1, 15)) AS day)
SELECT s.day, e.reference_at + to_days(CAST(s.day AS INTEGER)) AS at,
       e.bias_pct + e.drift_pct_per_30d * s.day / 30 AS bias_pct,
       sqrt(greatest(e.se_bias ^ 2 + (s.day / 30) ^ 2 * e.se_drift ^ 2 + 2 * (s.day / 30) * e.cov, 0)) AS se_pct
FROM est e, steps s
ORDER BY s.day;
