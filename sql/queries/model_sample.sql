-- name: model_sample
-- One row: a check of model_base in a reproducible pseudo-random sample (a share $share of the
-- checks, chosen by the hash of the check id), for residual diagnostics.
SELECT instrument_id, baseline_period, lot_id, residual_group, measured_at, y, t, d
FROM model_base
WHERE hash(check_id) % 1000000 < CAST($share * 1000000 AS BIGINT)
ORDER BY check_id;
