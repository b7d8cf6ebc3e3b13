-- name: quarantine
-- One row: one field of one input row that could not be stored, with why.
-- A row with several problems appears once per problem; raw_line keeps the whole row.
CREATE TABLE IF NOT EXISTS quarantine (
    file_id    INTEGER NOT NULL,
    line       BIGINT NOT NULL,
    field      TEXT,
    value      TEXT,
    reason     TEXT NOT NULL,     -- pipeline.errors.QuarantineReason
    message    TEXT NOT NULL,
    raw_line   TEXT
);
