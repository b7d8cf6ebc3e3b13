-- name: charts_segment_offset
-- Fragment of charts_input.sql: the re-baselines of the check's unit since its baseline period began.
(SELECT count(*) FROM chart_rebaselines rb
 WHERE rb.instrument_id = r.instrument_id
   AND rb.rebaseline_at <= r.measured_at
   AND rb.rebaseline_at > coalesce(r.baseline_started_at, TIMESTAMP '1900-01-01'))
