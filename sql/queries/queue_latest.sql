-- name: queue_latest
-- One row: a unit in the latest stored service queue (optionally one region), with its place.
SELECT q.rank, q.instrument_id, i.region, i.site_id, q.p_breach, q.rank_low, q.rank_high, q.reasons,
       q.evidence, q.computed_at
FROM service_queue q
LEFT JOIN instruments i USING (instrument_id)
WHERE q.computed_at = (SELECT max(computed_at) FROM service_queue)
  AND ($region IS NULL OR i.region = $region)
ORDER BY q.rank;
