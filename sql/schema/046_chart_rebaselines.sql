-- name: chart_rebaselines
-- One row: an explicit, recorded re-baseline of a unit's charts (all levels) from rebaseline_at;
-- it starts a new chart segment like a calibration does.
CREATE TABLE IF NOT EXISTS chart_rebaselines (
    instrument_id  TEXT NOT NULL,
    rebaseline_at  TIMESTAMP NOT NULL,
    reason         TEXT NOT NULL,
    recorded_at    TIMESTAMP NOT NULL,
    recorded_by    TEXT,
    PRIMARY KEY (instrument_id, rebaseline_at)
);
