-- name: digest_model_diagnostics
-- One row: a diagnostic of fit $fit_id.
SELECT diagnostic, value, passed, message FROM model_diagnostics WHERE fit_id = $fit_id ORDER BY diagnostic;
