-- name: chart_points (own_sigma flag; CUSUM run counters kept in chart_state only)
-- Storing a fleet's points is the largest single cost of a full analyse, and DuckDB's append cost
-- grows with each column (about 0.15-0.5 CPU-s per column for 9.3 million points). The sigma
-- source of a point, one of two strings, becomes a BOOLEAN (0.5 -> 0.16 CPU-s): own_sigma is
-- true where the point is standardised by its segment's own frozen baseline, false during the
-- Quesenberry Q phase against the fleet pooled sigma. Page's N+/N- counters (checks since each
-- CUSUM side was last zero) fed only the CUSUM onset estimate, which chart_signals.onset_at
-- stores; the counters of each group's last point stay in chart_state for the next run.
ALTER TABLE chart_points ADD COLUMN own_sigma BOOLEAN;
UPDATE chart_points SET own_sigma = (sigma_source = 'unit');
ALTER TABLE chart_points DROP COLUMN sigma_source;
ALTER TABLE chart_points DROP COLUMN cusum_upper_run;
ALTER TABLE chart_points DROP COLUMN cusum_lower_run;
