-- name: digest_daily_fails
-- One row: a UTC day in [$start, $end) with the fleet's checks and checks out of tolerance.
SELECT CAST(measured_at AS DATE) AS day, count(*) AS n_checks, count(*) FILTER (WHERE verdict = 'fail') AS n_fail
FROM check_results
WHERE measured_at >= $start AND measured_at < $end
GROUP BY day ORDER BY day;
