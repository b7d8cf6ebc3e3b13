-- name: charts_name_codes
-- Temp tables numbering the names charts_input.sql returns as integer codes (units, technologies,
-- standard kinds), each in name order. pipeline/charts/analyse.py reads them back and drops them.
CREATE OR REPLACE TEMP TABLE _bf_units AS
SELECT instrument_id, CAST(row_number() OVER (ORDER BY instrument_id) - 1 AS INTEGER) AS unit_code
FROM (SELECT instrument_id FROM instruments UNION SELECT DISTINCT instrument_id FROM checks);
CREATE OR REPLACE TEMP TABLE _bf_technologies AS
SELECT name, CAST(row_number() OVER (ORDER BY name) - 1 AS INTEGER) AS code
FROM (SELECT 'unknown' AS name UNION SELECT DISTINCT technology FROM instruments WHERE technology IS NOT NULL);
CREATE OR REPLACE TEMP TABLE _bf_kinds AS
SELECT name, CAST(row_number() OVER (ORDER BY name) - 1 AS INTEGER) AS code
FROM (SELECT 'unknown' AS name UNION SELECT DISTINCT standard_kind FROM lots WHERE standard_kind IS NOT NULL);
