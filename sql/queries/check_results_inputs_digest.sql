-- name: check_results_inputs_digest
-- Digests of what check_results depends on besides checks: the reference tables and the
-- standards settings (inputs), and the baseline and solution-change events (events).
SELECT
    md5(concat_ws('#',
        (SELECT string_agg(CAST(t AS VARCHAR), chr(10) ORDER BY CAST(t AS VARCHAR)) FROM lots t),
        (SELECT string_agg(CAST(t AS VARCHAR), chr(10) ORDER BY CAST(t AS VARCHAR)) FROM instruments t),
        (SELECT string_agg(CAST(t AS VARCHAR), chr(10) ORDER BY CAST(t AS VARCHAR)) FROM sites t),
        (SELECT string_agg(concat_ws('|', simulator_nominal_c, simulator_window_c, correct_wet_bath_temperature,
                                     correct_dry_gas_pressure, wet_bath_temperature_coefficient,
                                     reference_pressure_kpa), chr(10)) FROM standards_parameters),
        (SELECT string_agg(CAST(t AS VARCHAR), chr(10) ORDER BY CAST(t AS VARCHAR)) FROM standards_compensating t),
        (SELECT string_agg(CAST(t AS VARCHAR), chr(10) ORDER BY CAST(t AS VARCHAR)) FROM tolerance_rules t),
        $view_sql)) AS inputs_digest,
    md5(coalesce((SELECT string_agg(concat_ws('|', instrument_id, event_at, event_type), chr(10)
                                    ORDER BY instrument_id, event_at, event_type)
                  FROM service_events
                  WHERE event_type IN ('calibration', 'sensor_replacement', 'solution_change')), '')) AS events_digest;
