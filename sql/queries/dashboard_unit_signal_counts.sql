-- name: dashboard_unit_signal_counts
-- One row: a unit with its control-chart signals in the last $days days of data.
-- requires: chart_signals, checks
SELECT instrument_id, count(*) AS recent_signals, max(measured_at) AS last_signal_at
FROM chart_signals
WHERE measured_at >= (SELECT max(measured_at) FROM checks) - to_days(CAST($days AS INTEGER))
GROUP BY instrument_id;
