-- name: service_queue
-- One row: a unit's place in the service queue computed at computed_at (the data's as-of time, UTC),
-- its probability of breaching tolerance before the next visit, its rank interval, reasons and evidence.
CREATE TABLE IF NOT EXISTS service_queue (
    computed_at    TIMESTAMP NOT NULL,   -- as-of time of the data (UTC), not the wall clock
    instrument_id  TEXT NOT NULL,
    rank           INTEGER NOT NULL,
    p_breach       DOUBLE NOT NULL,
    rank_low       INTEGER,              -- 5th percentile of simulated ranks
    rank_high      INTEGER,              -- 95th percentile of simulated ranks
    reasons        TEXT,                 -- JSON list of short sentences
    evidence       TEXT,                 -- JSON object: the figures behind the reasons, settings digest
    PRIMARY KEY (computed_at, instrument_id)
);
