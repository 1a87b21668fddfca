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

-- Has each trailer's cooling changed in week 6, against its own weeks 1 to 5? The plain
-- two-sample test (dist_empirical) counts every five-minute reading as independent, so
-- it calls ordinary compressor cycles and slow swings a change. dist_series(temp_c, ts)
-- estimates from the readings in time order how many independent readings they are
-- worth (n_eff) and tests at that size: if a trailer's cooling has not changed, this
-- p-value falls below 0.05 about 5% of the time (in simulation, at most that often).
-- A trend inside the period reads as strong dependence (a small n_eff), so a small p
-- with a small n_eff means "changed", and the shift says by how much.

-- Changed since weeks 1-5? Independent vs series-aware p-values (dist_series, dist_ks)
WITH parked AS (
    SELECT trailer, CASE WHEN week = 6 THEN 'now' ELSE 'before' END AS period, ts, temp_c
    FROM readings
    WHERE route IS NULL
),
d AS (
    SELECT trailer, period,
           count(temp_c) AS readings,
           dist_empirical(temp_c) AS plain,
           dist_series(temp_c, ts) AS series
    FROM parked
    GROUP BY trailer, period
)
SELECT n.trailer,
       n.readings,
       round(dist_n_eff(n.series), 0) AS n_eff,
       round(dist_quantile(n.series, 0.5) - dist_quantile(b.series, 0.5), 2) AS shift_c,
       round(dist_ks(n.plain, b.plain) ->> '$.p', 4) AS p_independent,
       round(dist_ks(n.series, b.series) ->> '$.p', 4) AS p_series,
       CASE WHEN dist_ks(n.series, b.series) ->> '$.p' < 0.05 THEN 'changed' ELSE 'steady' END
           AS verdict
FROM d AS n
JOIN d AS b ON b.trailer = n.trailer AND b.period = 'before'
WHERE n.period = 'now'
ORDER BY p_series, n.trailer;
