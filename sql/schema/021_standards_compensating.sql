-- name: standards_compensating
-- One row: a technology or instrument model that corrects for barometric pressure itself,
-- so its dry-gas checks are not scaled by P / 101.325. Written by sync_standards_settings.
CREATE TABLE IF NOT EXISTS standards_compensating (
    applies_to  TEXT NOT NULL CHECK (applies_to IN ('technology', 'model')),
    name        TEXT NOT NULL,
    PRIMARY KEY (applies_to, name)
);
