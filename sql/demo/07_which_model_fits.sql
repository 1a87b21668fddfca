-- Which model fits one trailer's temperatures on the road? Candidate families fitted by
-- maximum likelihood, the two-regime mixture beside them, ranked by BIC, and each checked
-- against the data's ECDF by the one-sample Kolmogorov-Smirnov statistic. The parameters
-- were estimated from these same readings, so the plain KS p-value would be far too large
-- (Lilliefors); ks_d says how far apart the fitted cdf and the ECDF are.

-- TR03 on route: candidate models ranked by BIC, with their largest gap to the ECDF (dist_fit, dist_mixture, dist_ks)
WITH r AS (SELECT temp_c FROM readings WHERE trailer = 'TR03' AND route IS NOT NULL),
fits(model, m) AS (
    SELECT 'normal', dist_fit(temp_c, 'normal') FROM r
    UNION ALL SELECT 'lognormal', dist_fit(temp_c, 'lognormal') FROM r
    UNION ALL SELECT 'gamma', dist_fit(temp_c, 'gamma') FROM r
    UNION ALL SELECT 'weibull', dist_fit(temp_c, 'weibull') FROM r
    UNION ALL SELECT 'two normal regimes', dist_mixture(temp_c, 2) FROM r
),
data AS (SELECT dist_empirical(temp_c) AS d FROM r)
SELECT model,
       m ->> '$.n' AS readings,
       round(m ->> '$.aic', 1) AS aic,
       round(m ->> '$.bic', 1) AS bic,
       round(dist_ks(data.d, fits.m) ->> '$.d', 3) AS ks_d
FROM fits, data
ORDER BY m ->> '$.bic';

-- How close can any smooth cdf come? The logger reports to 0.1 degC, so the ECDF climbs
-- in steps, and a continuous cdf misses the top or the bottom of the tallest one by at
-- least half its height: no model's ks_d can be smaller than ks_d_floor.

-- TR03 on route: the tallest step of the ECDF and the smallest ks_d it allows (dist_steps)
WITH s AS (
    SELECT x, cdf - lag(cdf, 1, 0) OVER (ORDER BY x) AS step
    FROM dist_steps((SELECT dist_empirical(temp_c) FROM readings
                     WHERE trailer = 'TR03' AND route IS NOT NULL))
)
SELECT round(max(step), 3) AS tallest_step,
       (SELECT x FROM s ORDER BY step DESC, x LIMIT 1) AS at_c,
       round(max(step) / 2, 3) AS ks_d_floor
FROM s;
