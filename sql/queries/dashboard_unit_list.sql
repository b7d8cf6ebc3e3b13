-- name: dashboard_unit_list
-- One row: an instrument, for the unit picker.
-- requires: instruments
SELECT instrument_id, region, site_id, technology, model, in_service_on
FROM instruments
ORDER BY instrument_id;
