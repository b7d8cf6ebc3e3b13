-- name: check_results_insert_new
-- Insert the check_results rows of checks newer than $through (by check_id) for units whose new
-- checks all come after their stored ones: checks_since_solution_change continues from the
-- stored rows of the same unit and solution change. The refresh fills in the unit filter: TRUE, or
-- NOT (instrument_id IN (...)) for units it has just recomputed whole.
INSERT INTO check_results BY NAME
WITH fresh AS (
    SELECT * FROM check_results_live l WHERE l.check_id > $through AND {unit_filter}
),
stored AS (
    SELECT r.instrument_id, r.solution_changed_at, count(*) AS n
    FROM check_results r
    WHERE r.standard_kind = 'wet_bath'
      AND r.instrument_id IN (SELECT DISTINCT instrument_id FROM fresh WHERE standard_kind = 'wet_bath')
    GROUP BY ALL
)
SELECT f.*,
       CASE WHEN f.standard_kind = 'wet_bath' THEN
           coalesce(s.n, 0) + count(*) OVER (PARTITION BY f.instrument_id, f.solution_changed_at
                                             ORDER BY f.measured_at, f.check_id ROWS UNBOUNDED PRECEDING) - 1
       END AS checks_since_solution_change
FROM fresh f
LEFT JOIN stored s
    ON s.instrument_id = f.instrument_id AND s.solution_changed_at IS NOT DISTINCT FROM f.solution_changed_at;
