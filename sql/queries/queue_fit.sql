-- name: queue_fit
-- One row: the latest converged fleet-model fit at or before $as_of, with its parameters (JSON text).
SELECT fit_id, parameters FROM model_fits WHERE converged AND window_end <= $as_of
ORDER BY window_end DESC, fit_id DESC LIMIT 1;
