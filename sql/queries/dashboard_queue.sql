-- name: dashboard_queue
-- One row: a unit in the latest service queue, with its rank, probability of breach, reasons and place.
-- requires: service_queue, instruments
SELECT q.rank, q.instrument_id, i.region, i.site_id, i.technology, i.model,
       q.p_breach, q.rank_low, q.rank_high, q.reasons, q.computed_at
FROM service_queue q
LEFT JOIN instruments i USING (instrument_id)
WHERE q.computed_at = (SELECT max(computed_at) FROM service_queue)
ORDER BY q.rank;
