-- name: standards_lot_flags
-- One row: a lot used by checks (registered or not), with its registry entry and how many
-- of its checks carry each lot flag, between $start and $end (UTC, inclusive).
SELECT
    cr.lot_id,
    any_value(l.standard_kind) AS standard_kind,
    any_value(l.target) AS target,
    any_value(l.expanded_uncertainty) AS expanded_uncertainty,
    any_value(l.certified_on) AS certified_on,
    any_value(l.expires_on) AS expires_on,
    bool_or(l.lot_id IS NOT NULL) AS registered,
    count(*) AS n_checks,
    count(DISTINCT cr.instrument_id) AS n_units,
    count(*) FILTER (WHERE cr.lot_expired) AS n_expired,
    count(*) FILTER (WHERE cr.lot_wrong_kind) AS n_wrong_kind,
    count(*) FILTER (WHERE cr.lot_before_certified) AS n_before_certified,
    count(*) FILTER (WHERE cr.temp_out_of_window) AS n_temp_out_of_window,
    count(*) FILTER (WHERE cr.verdict_disagrees) AS n_verdict_disagrees,
    min(cr.measured_at) AS first_check_at,
    max(cr.measured_at) AS last_check_at
FROM check_results cr
LEFT JOIN lots l ON l.lot_id = cr.lot_id
WHERE cr.measured_at BETWEEN $start AND $end
GROUP BY cr.lot_id
ORDER BY cr.lot_id;
