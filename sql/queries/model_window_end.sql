-- name: model_window_end
-- One row: the time of the latest check with a relative error (the fleet model's window end).
SELECT max(measured_at) AS window_end FROM check_results WHERE relative_error IS NOT NULL;
