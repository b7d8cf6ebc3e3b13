-- name: model_previous_verdicts
-- One row: a lot's verdict and verdict_since in the latest converged fit before fit $fit_id.
SELECT lot_id, verdict, verdict_since
FROM lot_effects
WHERE fit_id = (SELECT max(fit_id) FROM model_fits WHERE converged AND fit_id < $fit_id);
