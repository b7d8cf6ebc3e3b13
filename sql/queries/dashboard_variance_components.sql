-- name: dashboard_variance_components
-- One row: a variance component of the latest converged fleet model with its interval.
-- requires: variance_components, model_fits
SELECT component, variance, ci_low, ci_high
FROM variance_components
WHERE fit_id = (SELECT fit_id FROM model_fits WHERE converged ORDER BY fitted_at DESC LIMIT 1)
ORDER BY variance DESC;
