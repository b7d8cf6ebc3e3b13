-- name: digest_out_of_tolerance
-- One row: a unit with checks out of tolerance (our verdict) in [$start, $end): count, worst error, last one.
SELECT r.instrument_id, any_value(r.region) AS region, count(*) AS n_fail,
       max(abs(r.relative_error)) AS worst_abs_relative_error,
       arg_max(r.relative_error, abs(r.relative_error)) AS worst_relative_error,
       max(r.measured_at) AS last_fail_at, string_agg(DISTINCT r.lot_id, ', ' ORDER BY r.lot_id) AS lots
FROM check_results r
WHERE r.verdict = 'fail' AND r.measured_at >= $start AND r.measured_at < $end
GROUP BY r.instrument_id
ORDER BY n_fail DESC, r.instrument_id;
