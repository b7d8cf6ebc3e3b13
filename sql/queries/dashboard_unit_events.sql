-- name: dashboard_unit_events
-- One row: a service event of unit $instrument_id (level NULL), or a change of reference lot seen
-- in its checks at one level (from check_results, which skips other units' row groups: see dashboard_unit_levels).
-- requires: service_events, check_results
WITH lot_runs AS (
    SELECT measured_at, level, lot_id,
           lag(lot_id) OVER (PARTITION BY level ORDER BY measured_at, check_id) AS previous_lot
    FROM check_results
    WHERE instrument_id = $instrument_id
)
SELECT event_at, event_type, notes, CAST(NULL AS DOUBLE) AS level
FROM service_events WHERE instrument_id = $instrument_id
UNION ALL
SELECT measured_at, 'lot_change', previous_lot || ' -> ' || lot_id, level
FROM lot_runs WHERE previous_lot IS NOT NULL AND previous_lot <> lot_id
ORDER BY 1;
