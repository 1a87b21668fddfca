-- 95th percentile of cargo temperature per trailer and week
-- kind: lines
SELECT week, round(quantile(temp_c, 0.95), 2) AS p95_c, trailer
FROM readings
GROUP BY trailer, week
ORDER BY trailer, week;
