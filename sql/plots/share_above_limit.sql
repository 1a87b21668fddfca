-- Share of readings above 5 degC per trailer: weeks 1 to 5 against week 6
-- kind: bars
SELECT trailer,
       round(1 - ecdf(temp_c, 5.0), 4) AS share_above_5c,
       CASE WHEN week = 6 THEN 'week 6' ELSE 'weeks 1-5' END AS period
FROM readings
GROUP BY trailer, week = 6
ORDER BY week = 6, trailer;
