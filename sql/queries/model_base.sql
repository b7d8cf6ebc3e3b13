-- name: model_base
-- One row: a check in the fleet-model window ($window_start, $window_end] as the model sees it:
-- unit-period, lot, residual group (technology @ level), y = relative error in percent,
-- t = time since the period's calibration in 30-day units (period 0: since its first check in the
-- window), d = checks since the last wet-bath solution change / 100 (0 for dry gas).
-- Materialised once per fit as a temporary table so check_results is evaluated once.
CREATE OR REPLACE TEMP TABLE model_base AS
SELECT check_id, instrument_id, baseline_period, lot_id, standard_kind, measured_at,
       coalesce(technology, 'unknown') || ' @ ' || CAST(level AS TEXT) AS residual_group,
       100.0 * relative_error AS y,
       epoch(measured_at - CASE WHEN baseline_period = 0 THEN
                 min(measured_at) OVER (PARTITION BY instrument_id, baseline_period)
             ELSE baseline_started_at END) / (86400.0 * 30.0) AS t,
       coalesce(checks_since_solution_change, 0) / 100.0 AS d
FROM check_results
WHERE measured_at > $window_start AND measured_at <= $window_end
  AND relative_error IS NOT NULL AND lot_id IS NOT NULL
  AND coalesce(outcome, 'pass') NOT IN ('aborted', 'invalid');
