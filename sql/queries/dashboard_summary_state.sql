-- name: dashboard_summary_state
-- One row (or none before the first main job): what the dashboard summaries were computed from.
-- requires: summary_state
SELECT checks_through, n_checks, first_check_at, last_check_at, computed_at, software_version
FROM summary_state
WHERE state_id = 1;
