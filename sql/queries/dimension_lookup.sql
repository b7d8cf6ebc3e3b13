-- name: dimension_lookup
-- One row per row of _bf_dimension_keys (the key columns {columns}, and row): its number in the
-- small table {table} ({id_column}), or -1 when that key is not numbered yet
-- (pipeline/charts/dimensions.py fills in the names).
SELECT k.row, CAST(coalesce(d.{id_column}, -1) AS INTEGER) AS id
FROM _bf_dimension_keys k
LEFT JOIN {table} d USING ({columns});
