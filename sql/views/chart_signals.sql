-- name: chart_signals
-- One row: one signal of one chart of a unit and level at a check, with the estimated onset of
-- the change (CUSUM: Page's last-zero estimator) and the control checks run since then. The
-- stored tables are chart_signal_values and chart_signal_kinds
-- (sql/schema/106_chart_signal_kinds.sql); read signals here.
CREATE OR REPLACE VIEW chart_signals AS
SELECT v.signal_id, v.instrument_id, v.level, v.check_id, v.measured_at, k.chart, k.rule, k.direction, v.size,
       v.onset_at, v.impact_checks, v.p_value, v.fleet_significant, v.run_id, v.created_at
FROM chart_signal_values v
JOIN chart_signal_kinds k USING (kind);
