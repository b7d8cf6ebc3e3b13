-- name: tolerance_rules
-- One row: an acceptance rule |measured - expected| <= max(absolute, relative * expected).
-- check_type '' means any type; level_milli 0 means any level (level in 0.001 g/210L steps).
-- check_results takes the most specific rule: type and level, then type, then level, then default.
-- Written by sync_standards_settings; the row inserted here is the default of StandardsSettings.
CREATE TABLE IF NOT EXISTS tolerance_rules (
    rule_id      INTEGER PRIMARY KEY,
    check_type   TEXT NOT NULL,
    level_milli  INTEGER NOT NULL,
    absolute     DOUBLE NOT NULL,
    relative     DOUBLE NOT NULL,
    UNIQUE (check_type, level_milli)
);
INSERT INTO tolerance_rules
SELECT 0, '', 0, 0.005, 0.05
WHERE NOT EXISTS (SELECT 1 FROM tolerance_rules);
