-- name: check_results_live
-- One row: one stored check with everything later features read: context (technology,
-- region, standard kind, baseline period, solution change), the expected value with the
-- correction that made it, the error, breathfleet's own verdict and data-quality flags.
-- Computed per row from checks and the reference tables. Features read the table
-- check_results (sql/schema/008), which pipeline/check_results.py fills from this view and
-- completes with checks_since_solution_change; filter on instrument_id or check_id here and
-- DuckDB computes only those rows.
--
-- Expected value (pipeline/standards/expected_values.py holds the same formulas in Python):
--   expected_raw = the lot's certified value (the check's own target when the lot is unknown)
--   wet bath:  expected = expected_raw * exp(c (T - T_nominal)), c = 0.06583 per deg C,
--              from Dubowski (1979), K_a/w x 10^3 = 0.04145 exp(0.06583 T)
--   dry gas:   expected = expected_raw * P / 101.325 kPa, P logged, else from the site's
--              elevation by the ICAO/ISO 2533 standard atmosphere
--              P = 101.325 (1 - 2.25577e-5 h)^5.25588; no scaling for compensating
--              technologies and models
-- Parameters come from the tables standards_parameters, standards_compensating and
-- tolerance_rules, which writers fill from settings with sync_standards_settings(con, settings).
-- Tolerance: the most specific rule wins (check type and level, check type, level, default);
-- |measured - expected| <= max(absolute, relative * expected), with 1e-9 slack for binary floats.
-- Flags are never NULL. Date comparisons use the UTC date of measured_at.
CREATE OR REPLACE VIEW check_results_live AS
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
),
joined AS (
    SELECT
        p.*,
        i.technology, i.model, coalesce(s.region, i.region) AS region,
        l.standard_kind, l.target AS lot_target, l.certified_on, l.expires_on,
        s.elevation_m,
        CAST(round(p.target * 1000) AS INTEGER) AS level_milli,
        coalesce(i.technology IN (SELECT name FROM standards_compensating WHERE applies_to = 'technology')
                 OR i.model IN (SELECT name FROM standards_compensating WHERE applies_to = 'model'),
                 FALSE) AS compensating
    FROM placed p
    LEFT JOIN instruments i USING (instrument_id)
    LEFT JOIN sites s ON s.site_id = coalesce(p.site_id, i.site_id)
    LEFT JOIN lots l USING (lot_id)
),
methods AS (
    SELECT
        j.*,
        sp.simulator_nominal_c, sp.simulator_window_c, sp.wet_bath_temperature_coefficient,
        sp.reference_pressure_kpa,
        coalesce(j.lot_target, j.target) AS expected_raw,
        CASE
            WHEN j.lot_target IS NULL THEN 'none_unknown_lot'
            WHEN j.standard_kind = 'wet_bath' AND NOT sp.correct_wet_bath_temperature THEN 'none_not_corrected'
            WHEN j.standard_kind = 'wet_bath' AND j.simulator_temp_c IS NULL THEN 'none_no_temperature'
            WHEN j.standard_kind = 'wet_bath' THEN 'wet_bath_temperature'
            WHEN j.standard_kind = 'dry_gas' AND NOT sp.correct_dry_gas_pressure THEN 'none_not_corrected'
            WHEN j.standard_kind = 'dry_gas' AND j.compensating THEN 'none_compensating'
            WHEN j.standard_kind = 'dry_gas' AND j.pressure_kpa IS NOT NULL THEN 'dry_gas_pressure_logged'
            WHEN j.standard_kind = 'dry_gas' AND j.elevation_m IS NOT NULL THEN 'dry_gas_pressure_elevation'
            WHEN j.standard_kind = 'dry_gas' THEN 'none_no_pressure'
            ELSE 'none_unknown_kind'
        END AS correction_method
    FROM joined j
    CROSS JOIN standards_parameters sp
),
factored AS (
    SELECT
        m.*,
        CASE m.correction_method
            WHEN 'wet_bath_temperature' THEN
                exp(m.wet_bath_temperature_coefficient * (m.simulator_temp_c - m.simulator_nominal_c))
            WHEN 'dry_gas_pressure_logged' THEN m.pressure_kpa / m.reference_pressure_kpa
            WHEN 'dry_gas_pressure_elevation' THEN
                101.325 * pow(1.0 - 2.25577e-5 * m.elevation_m, 5.25588) / m.reference_pressure_kpa
            ELSE 1.0
        END AS correction_factor
    FROM methods m
),
judged AS (
    SELECT
        f.*,
        f.expected_raw * f.correction_factor AS expected,
        greatest(coalesce(r_tl.absolute, r_t.absolute, r_l.absolute, r_d.absolute),
                 coalesce(r_tl.relative, r_t.relative, r_l.relative, r_d.relative)
                     * f.expected_raw * f.correction_factor) AS tolerance,
        coalesce(r_tl.rule_id, r_t.rule_id, r_l.rule_id, r_d.rule_id) AS tolerance_rule_id
    FROM factored f
    LEFT JOIN tolerance_rules r_tl ON r_tl.check_type = f.check_type AND r_tl.level_milli = f.level_milli
    LEFT JOIN tolerance_rules r_t ON r_t.check_type = f.check_type AND r_t.level_milli = 0
    LEFT JOIN tolerance_rules r_l ON r_l.check_type = '' AND r_l.level_milli = f.level_milli
    LEFT JOIN tolerance_rules r_d ON r_d.check_type = '' AND r_d.level_milli = 0
),
verdicts AS (
    SELECT
        g.*,
        CASE
            WHEN g.tolerance IS NULL THEN NULL
            WHEN abs(g.measured - g.expected) <= g.tolerance + 1e-9 THEN 'pass'
            ELSE 'fail'
        END AS verdict
    FROM judged g
)
SELECT
    v.check_id, v.instrument_id, v.measured_at, v.lot_id, v.check_type,
    round(v.target, 3) AS level,
    v.target, v.measured, v.units, v.simulator_temp_c, v.pressure_kpa,
    v.site_id, v.operator_id, v.outcome,
    v.technology, v.model, v.region,
    v.standard_kind,
    coalesce(v.baseline_period, 0) AS baseline_period, v.baseline_started_at,
    v.solution_changed_at,
    v.expected_raw,
    v.expected,
    v.correction_factor,
    v.correction_method,
    v.measured - v.expected AS error,
    (v.measured - v.expected) / nullif(v.expected, 0) AS relative_error,
    v.verdict,
    coalesce(CAST(v.measured_at AS DATE) > v.expires_on, FALSE) AS lot_expired,
    (v.standard_kind IS NULL
        OR v.standard_kind NOT IN ('wet_bath', 'dry_gas')
        OR (v.standard_kind = 'wet_bath' AND v.simulator_temp_c IS NULL AND v.pressure_kpa IS NOT NULL)
        OR (v.standard_kind = 'dry_gas' AND v.pressure_kpa IS NULL AND v.simulator_temp_c IS NOT NULL)
    ) AS lot_wrong_kind,
    coalesce(CAST(v.measured_at AS DATE) < v.certified_on, FALSE) AS lot_before_certified,
    coalesce(v.standard_kind = 'wet_bath'
             AND abs(v.simulator_temp_c - v.simulator_nominal_c) > v.simulator_window_c + 1e-9,
             FALSE) AS temp_out_of_window,
    coalesce(v.outcome IN ('pass', 'fail') AND v.outcome <> v.verdict, FALSE) AS verdict_disagrees,
    v.tolerance,
    v.tolerance_rule_id
FROM verdicts v;
