-- name: model_cells
-- One row: sufficient statistics of one fleet-model cell (unit-period, lot, technology @ level):
-- count and sums of t, d, y, their squares and cross-products, over the temp table model_base.
SELECT instrument_id, baseline_period, lot_id, any_value(standard_kind) AS standard_kind, residual_group,
       count(*) AS n, sum(t) AS st, sum(t * t) AS stt, sum(d) AS sd, sum(d * d) AS sdd, sum(t * d) AS std,
       sum(y) AS sy, sum(t * y) AS sty, sum(d * y) AS sdy, sum(y * y) AS syy,
       max(t) AS t_max, max(measured_at) AS last_check_at
FROM model_base
GROUP BY instrument_id, baseline_period, lot_id, residual_group;
