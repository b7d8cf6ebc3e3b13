-- name: charts_verification_values
-- One row: the expected and measured value (g/210L) of a verification check being charted
-- (_bf_verification: check_id), in check_id order, for its linearity fit. The chart input
-- (charts_input.sql) leaves these two columns out: only verification checks need them, and two
-- fewer columns in the sorted read of a whole fleet made it 0.3-0.6 s faster.
SELECT r.check_id, r.expected, r.measured
FROM check_results r SEMI JOIN _bf_verification v USING (check_id)
WHERE r.check_type = 'verification'  -- all of _bf_verification: probes 0.7 of 10 million rows
ORDER BY r.check_id;
