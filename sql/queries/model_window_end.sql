-- name: model_window_end
-- One row: the time of the latest stored check (the fleet model's window end).
SELECT max(measured_at) AS window_end FROM checks;
