-- name: check_results
-- One row: one stored check with everything later features read: context (technology,
-- region, standard kind, baseline period, solution age), expected value, relative error
-- and breathfleet's own verdict. Every chart, model and report reads this view.
-- PRELIMINARY: expected = lot target, verdict by the default rule; the reference-standards
-- work replaces the expected-value columns and keeps the column names.
CREATE OR REPLACE VIEW check_results AS
WITH solution_changes AS (
    SELECT instrument_id, event_at AS solution_changed_at
    FROM service_events WHERE event_type = 'solution_change'
),
placed AS (
    SELECT c.*, bp.baseline_period, bp.started_at AS baseline_started_at, sc.solution_changed_at
    FROM checks c
    ASOF LEFT JOIN baseline_periods bp
        ON c.instrument_id = bp.instrument_id AND c.measured_at >= bp.started_at
    ASOF LEFT JOIN solution_changes sc
        ON c.instrument_id = sc.instrument_id AND c.measured_at >= sc.solution_changed_at
)
SELECT
    p.check_id, p.instrument_id, p.measured_at, p.lot_id, p.check_type,
    round(p.target, 3) AS level,
    p.target, p.measured, p.units, p.simulator_temp_c, p.pressure_kpa,
    p.site_id, p.operator_id, p.outcome,
    i.technology, i.model, coalesce(s.region, i.region) AS region,
    l.standard_kind,
    coalesce(p.baseline_period, 0) AS baseline_period, p.baseline_started_at,
    p.solution_changed_at,
    CASE WHEN l.standard_kind = 'wet_bath' THEN
        count(*) OVER (PARTITION BY p.instrument_id, p.solution_changed_at
                       ORDER BY p.measured_at, p.check_id ROWS UNBOUNDED PRECEDING) - 1
    END AS checks_since_solution_change,
    p.target AS expected_raw,
    p.target AS expected,
    1.0 AS correction_factor,
    'none' AS correction_method,
    p.measured - p.target AS error,
    (p.measured - p.target) / p.target AS relative_error,
    CASE WHEN abs(p.measured - p.target) <= greatest(0.005, 0.05 * p.target) THEN 'pass' ELSE 'fail' END AS verdict
FROM placed p
LEFT JOIN instruments i USING (instrument_id)
LEFT JOIN sites s ON s.site_id = coalesce(p.site_id, i.site_id)
LEFT JOIN lots l USING (lot_id);
