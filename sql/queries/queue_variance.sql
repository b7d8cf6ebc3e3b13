-- name: queue_variance
-- One row: a variance component of the latest converged fleet model fit at or before $as_of.
WITH fit AS (
    SELECT fit_id FROM model_fits WHERE converged AND window_end <= $as_of
    ORDER BY window_end DESC, fit_id DESC LIMIT 1
)
SELECT component, variance FROM variance_components
WHERE fit_id = (SELECT fit_id FROM fit)
ORDER BY component;
