-- Checks on the fleet's two temperature regimes (see sql/demo/06_two_regimes.sql). The
-- components of a mixture are sorted by mean: components[0] is the steady one. Written
-- with JSON fields only, so the file also runs on --engine datafusion.

-- two regimes beat one by BIC, and the steady one sits near the 3 degC setpoint
WITH one AS (SELECT dist_mixture(temp_c, 1) AS m FROM readings),
two AS (SELECT dist_mixture(temp_c, 2) AS m FROM readings),
parts AS (
    SELECT one.m ->> '$.bic' AS bic_one,
           two.m ->> '$.bic' AS bic_two,
           two.m ->> '$.components[0].weight' AS steady_weight,
           two.m ->> '$.components[0].mean' AS steady_mean,
           two.m ->> '$.components[0].sd' AS steady_sd,
           two.m ->> '$.components[1].mean' AS warm_mean
    FROM one, two
)
SELECT round(bic_one - bic_two) AS bic_gain,
       round(steady_mean, 2) AS steady_mean_c,
       round(steady_sd, 2) AS steady_sd_c,
       round(warm_mean, 2) AS excursion_mean_c,
       bic_two < bic_one
           AND steady_mean BETWEEN 2.5 AND 3.5 AND steady_sd < 0.5
           AND warm_mean > steady_mean + 1 AND steady_weight > 0.5 AS ok
FROM parts;

-- with the 0.1 degC resolution, BIC finds 2 or 3 regimes in each trailer's hourly readings
-- (none a spike on single grid values; taken as exact, most trailers get five or six)
WITH fits AS (
    SELECT trailer,
           dist_mixture(temp_c, NULL, 0.1) ->> '$.k' AS k_logged,
           dist_mixture(temp_c) ->> '$.k' AS k_exact
    FROM readings
    WHERE ts LIKE '%:00'
    GROUP BY trailer
)
SELECT count(*) AS trailers,
       sum(CASE WHEN k_logged = 2 THEN 1 ELSE 0 END) AS with_two_regimes,
       sum(CASE WHEN k_exact >= 5 THEN 1 ELSE 0 END) AS with_five_or_more_as_exact,
       min(k_logged) >= 2 AND max(k_logged) <= 3 AS ok
FROM fits;
