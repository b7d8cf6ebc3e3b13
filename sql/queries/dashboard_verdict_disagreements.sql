-- name: dashboard_verdict_disagreements
-- One row: a unit whose own pass/fail outcome disagrees with breathfleet's verdict, with counts
-- in each direction and the latest such check (top 200 units; summary_unit_levels, as of the
-- last main job).
-- requires: summary_unit_levels
SELECT instrument_id, sum(unit_pass_ours_fail) AS unit_pass_ours_fail,
       sum(unit_fail_ours_pass) AS unit_fail_ours_pass,
       sum(unit_pass_ours_fail + unit_fail_ours_pass) AS n_disagreements,
       max(last_disagreement_at) AS last_at
FROM summary_unit_levels
GROUP BY instrument_id
HAVING sum(unit_pass_ours_fail + unit_fail_ours_pass) > 0
ORDER BY n_disagreements DESC, instrument_id
LIMIT 200;
