-- name: dashboard_fill_summary_unit_levels
-- Writer (pipeline/dashboard_summary.py): fill summary_unit_levels from check_results.
INSERT INTO summary_unit_levels
SELECT instrument_id, level, count(*) AS n_checks, min(measured_at) AS first_check_at,
       max(measured_at) AS last_check_at, arg_max(verdict, (measured_at, check_id)) AS last_verdict,
       count(*) FILTER (WHERE outcome = 'pass' AND verdict = 'fail') AS unit_pass_ours_fail,
       count(*) FILTER (WHERE outcome = 'fail' AND verdict = 'pass') AS unit_fail_ours_pass,
       max(measured_at) FILTER (WHERE outcome IN ('pass', 'fail') AND verdict IN ('pass', 'fail')
                                  AND outcome <> verdict) AS last_disagreement_at
FROM check_results
GROUP BY instrument_id, level;
