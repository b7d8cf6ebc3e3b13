-- name: digest_silent_units
-- One row: a unit with no checks in the $silence_days before $end while another unit at its site reported.
WITH last AS (
    SELECT instrument_id, max(measured_at) AS last_check_at FROM checks WHERE measured_at < $end GROUP BY instrument_id
),
site AS (
    SELECT i.site_id, max(l.last_check_at) AS site_last FROM instruments i JOIN last l USING (instrument_id) GROUP BY i.site_id
)
SELECT i.instrument_id, i.region, i.site_id, l.last_check_at,
       date_diff('day', l.last_check_at, CAST($end AS TIMESTAMP)) AS days_silent
FROM instruments i JOIN last l USING (instrument_id) JOIN site s ON s.site_id = i.site_id
WHERE l.last_check_at < CAST($end AS TIMESTAMP) - to_days(CAST($silence_days AS INTEGER))
  AND s.site_last >= CAST($end AS TIMESTAMP) - to_days(CAST($silence_days AS INTEGER))
ORDER BY days_silent DESC, i.instrument_id;
