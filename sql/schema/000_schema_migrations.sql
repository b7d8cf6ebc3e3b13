-- name: schema_migrations
-- One row: a numbered schema file applied to this database, and when.
CREATE TABLE IF NOT EXISTS schema_migrations (
    version     INTEGER PRIMARY KEY,
    name        TEXT NOT NULL,
    applied_at  TIMESTAMP NOT NULL DEFAULT current_timestamp
);
