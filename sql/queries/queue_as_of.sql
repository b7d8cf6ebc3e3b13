-- name: queue_as_of
-- One row: the time of the latest check in the database (UTC), the default as-of time.
SELECT max(measured_at) AS as_of FROM checks;
