-- name: summary_unit_levels
-- One row: one unit at one check level, summarised from check_results by the main job
-- (pipeline/dashboard_summary.py) so the dashboard does not scan every check per page view:
-- its number of checks, first and last check, breathfleet's verdict on the latest check, and
-- the checks where the unit's own pass/fail disagrees with that verdict.
CREATE TABLE IF NOT EXISTS summary_unit_levels (
    instrument_id         TEXT NOT NULL,
    level                 DOUBLE,             -- g/210L, round(target, 3)
    n_checks              BIGINT NOT NULL,
    first_check_at        TIMESTAMP,
    last_check_at         TIMESTAMP,
    last_verdict          TEXT,               -- verdict of the latest check (ties: highest check_id)
    unit_pass_ours_fail   BIGINT NOT NULL,    -- unit said pass, breathfleet's verdict fail
    unit_fail_ours_pass   BIGINT NOT NULL,    -- unit said fail, breathfleet's verdict pass
    last_disagreement_at  TIMESTAMP
);
