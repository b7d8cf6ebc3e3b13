-- name: dashboard_model_diagnostics
-- One row: a diagnostic of the latest fleet model fit, whether it passed, and the fit's summary.
-- requires: model_diagnostics, model_fits
SELECT d.diagnostic, d.value, d.passed, d.message, f.fitted_at, f.converged, f.boundary,
       f.n_checks, f.n_units, f.n_lots, f.window_start, f.window_end
FROM model_diagnostics d
JOIN model_fits f USING (fit_id)
WHERE d.fit_id = (SELECT fit_id FROM model_fits ORDER BY fitted_at DESC LIMIT 1)
ORDER BY d.passed, d.diagnostic;
