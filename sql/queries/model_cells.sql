-- name: model_cells
-- One row: sufficient statistics of one fleet-model cell (unit-period, lot, technology @ level):
-- count and sums of t, d, y, their squares and cross-products, over the temp table model_base.
-- fsum (compensated summation) and the ORDER BY make the statistics, and so the fit, repeatable
-- whatever order parallel threads add rows in.
SELECT instrument_id, baseline_period, lot_id, any_value(standard_kind) AS standard_kind, residual_group,
       count(*) AS n, fsum(t) AS st, fsum(t * t) AS stt, fsum(d) AS sd, fsum(d * d) AS sdd, fsum(t * d) AS std,
       fsum(y) AS sy, fsum(t * y) AS sty, fsum(d * y) AS sdy, fsum(y * y) AS syy,
       max(t) AS t_max, max(measured_at) AS last_check_at
FROM model_base
GROUP BY instrument_id, baseline_period, lot_id, residual_group
ORDER BY instrument_id, baseline_period, lot_id, residual_group;
