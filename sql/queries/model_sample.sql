-- name: model_sample
-- One row: a check of model_base in a reproducible pseudo-random sample of $sample_size rows
-- (smallest hashes of the check id), for residual diagnostics.
SELECT instrument_id, baseline_period, lot_id, residual_group, measured_at, y, t, d
FROM model_base
ORDER BY hash(check_id)
LIMIT $sample_size;
