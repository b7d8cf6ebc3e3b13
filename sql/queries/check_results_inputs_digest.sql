-- name: check_results_inputs_digest
-- Fingerprints of what check_results depends on besides checks: the reference tables and the
-- standards settings (inputs), and the baseline and solution-change events (events). Each table
-- contributes its row count and the sum of its rows' hashes (order-independent, cheap at fleet size);
-- a change of any row changes the fingerprint with overwhelming probability.
SELECT
    concat_ws('#',
        (SELECT count(*) || ':' || coalesce(sum(hash(t)::HUGEINT), 0) FROM lots t),
        (SELECT count(*) || ':' || coalesce(sum(hash(t)::HUGEINT), 0) FROM instruments t),
        (SELECT count(*) || ':' || coalesce(sum(hash(t)::HUGEINT), 0) FROM sites t),
        (SELECT coalesce(sum(hash(simulator_nominal_c, simulator_window_c, correct_wet_bath_temperature,
                                   correct_dry_gas_pressure, wet_bath_temperature_coefficient,
                                   reference_pressure_kpa)::HUGEINT), 0) FROM standards_parameters),
        (SELECT count(*) || ':' || coalesce(sum(hash(t)::HUGEINT), 0) FROM standards_compensating t),
        (SELECT count(*) || ':' || coalesce(sum(hash(t)::HUGEINT), 0) FROM tolerance_rules t),
        $view_sql) AS inputs_digest,
    (SELECT count(*) || ':' || coalesce(sum(hash(instrument_id, event_at, event_type)::HUGEINT), 0)
     FROM service_events
     WHERE event_type IN ('calibration', 'sensor_replacement', 'solution_change')) AS events_digest;
