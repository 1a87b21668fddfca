-- The demo's questions, one file each: `ogive demo` runs every file in sql/demo in name
-- order against the invented fleet database (see demo-data/README.md).

-- Cargo temperature per depot: count, mean, spread and quartiles (profile)
SELECT depot,
       p ->> '$.n' AS readings,
       round(p ->> '$.mean', 2) AS mean_c,
       round(p ->> '$.sd', 2) AS sd_c,
       round(p ->> '$.q1', 2) AS q1_c,
       round(p ->> '$.median', 2) AS median_c,
       round(p ->> '$.q3', 2) AS q3_c,
       round(p ->> '$.max', 1) AS max_c,
       round(p ->> '$.skewness', 2) AS skewness
FROM (SELECT t.depot, profile(r.temp_c) AS p
      FROM readings AS r JOIN trailers AS t USING (trailer)
      GROUP BY t.depot)
ORDER BY depot;
