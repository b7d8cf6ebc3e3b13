-- name: record_checks
-- One row: a check of $instrument_id in [$start, $end) with its expected value, error, verdict and flags.
SELECT check_id, measured_at, check_type, level, lot_id, standard_kind, target, expected, measured,
       correction_method, error, relative_error, verdict, outcome, simulator_temp_c, pressure_kpa,
       baseline_period, lot_expired, lot_wrong_kind, lot_before_certified, temp_out_of_window, verdict_disagrees
FROM check_results
WHERE instrument_id = $instrument_id AND measured_at >= $start AND measured_at < $end
ORDER BY measured_at, check_id;
