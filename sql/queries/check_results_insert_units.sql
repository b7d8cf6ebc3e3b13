-- name: check_results_insert_units
-- Insert the check_results rows of whole units from the view check_results_live, adding
-- checks_since_solution_change (a window over each unit's checks). The refresh
-- (pipeline/check_results.py) fills in the unit filter: l.instrument_id IN (...), a literal list of
-- a batch of units, which DuckDB pushes down to the checks scan.
INSERT INTO check_results BY NAME
SELECT l.*,
       CASE WHEN l.standard_kind = 'wet_bath' THEN
           count(*) OVER (PARTITION BY l.instrument_id, l.solution_changed_at
                          ORDER BY l.measured_at, l.check_id ROWS UNBOUNDED PRECEDING) - 1
       END AS checks_since_solution_change
FROM check_results_live l
WHERE {unit_filter};
