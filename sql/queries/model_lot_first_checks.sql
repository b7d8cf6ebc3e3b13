-- name: model_lot_first_checks
-- One row: one of the first $max_checks checks made on a lot across the fleet within the model
-- window (model_base), in time order, for the new-lot acceptance rule.
WITH ranked AS (
    SELECT *, row_number() OVER (PARTITION BY lot_id ORDER BY measured_at, check_id) AS seq
    FROM model_base
)
SELECT lot_id, instrument_id, baseline_period, measured_at, residual_group, y, t, d, seq
FROM ranked WHERE seq <= $max_checks
ORDER BY lot_id, seq;
