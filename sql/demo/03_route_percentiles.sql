-- 95th percentile of cargo temperature per route, with the median and the 99th (quantile, quantiles)
SELECT route,
       kind,
       readings,
       round(p95, 2) AS p95_c,
       round(qs ->> '$[0]', 2) AS median_c,
       round(qs ->> '$[1]', 2) AS p99_c
FROM (SELECT r.route,
             ro.kind,
             count(r.temp_c) AS readings,
             quantile(r.temp_c, 0.95) AS p95,
             quantiles(r.temp_c, '[0.5, 0.99]') AS qs
      FROM readings AS r JOIN routes AS ro USING (route)
      GROUP BY r.route, ro.kind)
ORDER BY p95 DESC;
