-- name: record_chart_days
-- One row: a UTC day and level with chart points of $instrument_id in [$start, $end): the day's largest
-- |z|, the CUSUM and EWMA at the day's last check and the signals raised that day.
WITH pts AS (
    SELECT CAST(measured_at AS DATE) AS day, level, count(*) AS n_points, max(abs(z)) AS max_abs_z,
           arg_max(greatest(cusum_upper, cusum_lower), measured_at) AS cusum,
           arg_max(ewma, measured_at) AS ewma, arg_max(ewma_ucl, measured_at) AS ewma_ucl
    FROM chart_points
    WHERE instrument_id = $instrument_id AND measured_at >= $start AND measured_at < $end
    GROUP BY day, level
),
sig AS (
    SELECT CAST(measured_at AS DATE) AS day, level,
           string_agg(chart || ' ' || rule || ' ' || direction, '; ' ORDER BY chart, rule, direction) AS signals
    FROM chart_signals
    WHERE instrument_id = $instrument_id AND measured_at >= $start AND measured_at < $end
    GROUP BY day, level
)
SELECT p.day, p.level, p.n_points, p.max_abs_z, p.cusum, p.ewma, p.ewma_ucl, s.signals
FROM pts p LEFT JOIN sig s USING (day, level)
ORDER BY p.day, p.level;
