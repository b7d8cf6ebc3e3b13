-- name: dashboard_schema_version
-- One row: the newest schema migration applied to the snapshot the dashboard reads, to tell a
-- snapshot published by an older breathfleet from a current one.
-- requires: schema_migrations
SELECT max(version) AS version FROM schema_migrations;
