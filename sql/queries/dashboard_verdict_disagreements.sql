-- name: dashboard_verdict_disagreements
-- One row: a unit whose own pass/fail outcome disagrees with breathfleet's verdict, with counts
-- in each direction and the latest such check (top 200 units).
-- requires: check_results
SELECT instrument_id,
       count(*) FILTER (WHERE outcome = 'pass' AND verdict = 'fail') AS unit_pass_ours_fail,
       count(*) FILTER (WHERE outcome = 'fail' AND verdict = 'pass') AS unit_fail_ours_pass,
       count(*) AS n_disagreements, max(measured_at) AS last_at
FROM check_results
WHERE outcome IN ('pass', 'fail') AND verdict IN ('pass', 'fail') AND outcome <> verdict
GROUP BY instrument_id
ORDER BY n_disagreements DESC, instrument_id
LIMIT 200;
