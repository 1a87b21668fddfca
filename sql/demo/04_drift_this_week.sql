-- Which trailers drift from the fleet baseline this week? Readings while parked at the
-- depot (doors shut, unit running) show the cooling itself. The baseline is the whole
-- fleet's parked readings in weeks 1 to 5; a trailer that cools as well as the fleet has
-- about 5% of this week's parked readings above the baseline's 95th percentile.

-- Trailers drifting from the fleet baseline in week 6 (quantile, ecdf)
WITH baseline AS (
    SELECT quantile(temp_c, 0.5) AS p50, quantile(temp_c, 0.95) AS p95
    FROM readings
    WHERE route IS NULL AND week <= 5
)
SELECT r.trailer,
       round(quantile(r.temp_c, 0.5), 2) AS median_now_c,
       round(b.p50, 2) AS fleet_median_c,
       round(quantile(r.temp_c, 0.5) - b.p50, 2) AS shift_c,
       round(1 - ecdf(r.temp_c, b.p95), 3) AS share_above_fleet_p95,
       CASE WHEN 1 - ecdf(r.temp_c, b.p95) > 0.25 THEN 'drifting' ELSE 'steady' END AS verdict
FROM readings AS r, baseline AS b
WHERE r.route IS NULL AND r.week = 6
GROUP BY r.trailer, b.p50, b.p95
ORDER BY share_above_fleet_p95 DESC;
