-- name: digest_model_fit
-- One row: the latest fleet model fit (converged or not) with window end before $end.
SELECT fit_id, window_start, window_end, n_checks, n_units, n_lots, converged, boundary, warnings, software_version
FROM model_fits WHERE window_end < $end
ORDER BY window_end DESC, fit_id DESC LIMIT 1;
