-- name: record_instrument
-- One row: instrument $instrument_id with its site and region.
SELECT i.instrument_id, i.technology, i.model, i.site_id, coalesce(i.region, s.region) AS region,
       i.in_service_on, s.time_zone
FROM instruments i LEFT JOIN sites s USING (site_id)
WHERE i.instrument_id = $instrument_id;
