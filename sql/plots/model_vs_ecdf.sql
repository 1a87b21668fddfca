-- TR03 on route: the readings' ECDF against the fitted two-regime mixture
-- kind: steps
WITH r AS (SELECT temp_c FROM readings WHERE trailer = 'TR03' AND route IS NOT NULL),
v AS (SELECT dist_empirical(temp_c) AS d, dist_mixture(temp_c, 2) AS m FROM r)
SELECT s.x AS temp_c, s.cdf AS share_at_or_below, 'readings (ECDF)' AS series
FROM v, dist_steps(v.d) AS s
UNION ALL
SELECT c.x, c.cdf, 'two-regime mixture fit (cdf)'
FROM v, dist_curve(v.m, 2.0, 9.0, 701) AS c
ORDER BY series DESC, temp_c;
