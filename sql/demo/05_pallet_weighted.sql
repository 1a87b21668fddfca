-- What the cargo saw: each on-route reading weighted by the pallets aboard, so a full
-- trailer counts more than a nearly empty one at its last stop (weighted_quantile).

-- 95th percentile per depot, by reading and by pallet on board
SELECT t.depot,
       round(quantile(r.temp_c, 0.95), 2) AS p95_by_reading_c,
       round(weighted_quantile(r.temp_c, r.pallets, 0.95), 2) AS p95_by_pallet_c,
       round(weighted_quantile(r.temp_c, r.pallets, 0.5), 2) AS median_by_pallet_c
FROM readings AS r JOIN trailers AS t USING (trailer)
WHERE r.route IS NOT NULL
GROUP BY t.depot
ORDER BY t.depot;
