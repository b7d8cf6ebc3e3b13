-- name: queue_recent_checks
-- One row: a unit's check on its last day with checks (UTC date) up to $as_of, with our verdict,
-- relative error and the verdict of its lot in the latest converged fit.
WITH fit AS (
    SELECT fit_id FROM model_fits WHERE converged AND window_end <= $as_of
    ORDER BY window_end DESC, fit_id DESC LIMIT 1
),
last_day AS (
    SELECT instrument_id, max(CAST(measured_at AS DATE)) AS day
    FROM check_results WHERE measured_at <= $as_of GROUP BY instrument_id
)
SELECT r.instrument_id, r.check_id, r.measured_at, r.lot_id, r.level, r.relative_error, r.verdict,
       le.verdict AS lot_verdict, le.effect_pct AS lot_effect_pct
FROM check_results r
JOIN last_day d ON d.instrument_id = r.instrument_id AND CAST(r.measured_at AS DATE) = d.day
LEFT JOIN lot_effects le ON le.lot_id = r.lot_id AND le.fit_id = (SELECT fit_id FROM fit)
WHERE r.measured_at <= $as_of
ORDER BY r.instrument_id, r.measured_at, r.check_id;
