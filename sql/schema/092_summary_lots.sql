-- name: summary_lots
-- One row: one lot seen in check_results, with how many checks and units used it and when;
-- written by the main job (pipeline/dashboard_summary.py) for the lots page.
CREATE TABLE IF NOT EXISTS summary_lots (
    lot_id         TEXT NOT NULL,
    n_checks       BIGINT NOT NULL,
    n_units        BIGINT NOT NULL,
    first_used_at  TIMESTAMP,
    last_used_at   TIMESTAMP
);
