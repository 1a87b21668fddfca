-- Share of readings above the 5 degC limit per trailer, over the six weeks (ecdf)
-- The limit is an example; cold-chain limits depend on the product and local rules.
SELECT r.trailer,
       t.depot,
       count(r.temp_c) AS readings,
       round(1 - ecdf(r.temp_c, 5.0), 4) AS share_above_5c,
       round((1 - ecdf(r.temp_c, 5.0)) * count(r.temp_c) * 5 / 60.0, 1) AS hours_above_5c
FROM readings AS r JOIN trailers AS t USING (trailer)
GROUP BY r.trailer, t.depot
ORDER BY share_above_5c DESC;
