-- Cold-chain checks. The limits are examples: real limits depend on the product and on
-- local food-safety rules.

-- each trailer spends at most 5% of its readings above 5 degC
SELECT trailer,
       round(1 - ecdf(temp_c, 5.0), 4) AS share_above_5c,
       1 - ecdf(temp_c, 5.0) <= 0.05 AS ok
FROM readings
GROUP BY trailer;

-- each route's 95th percentile stays under 8 degC
SELECT route,
       round(quantile(temp_c, 0.95), 2) AS p95_c,
       quantile(temp_c, 0.95) < 8.0 AS ok
FROM readings
WHERE route IS NOT NULL
GROUP BY route;
