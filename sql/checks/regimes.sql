-- Checks on the fleet's two temperature regimes (see sql/demo/06_two_regimes.sql).

-- two regimes beat one by BIC, and the steady one sits near the 3 degC setpoint
WITH one AS (SELECT dist_mixture(temp_c, 1) AS m FROM readings),
two AS (SELECT dist_mixture(temp_c, 2) AS m FROM readings),
steady AS (SELECT c.* FROM two, dist_components(two.m) AS c WHERE c.component = 1),
warm AS (SELECT c.* FROM two, dist_components(two.m) AS c WHERE c.component = 2)
SELECT round(one.m ->> '$.bic' - (two.m ->> '$.bic')) AS bic_gain,
       round(steady.mean, 2) AS steady_mean_c,
       round(steady.sd, 2) AS steady_sd_c,
       round(warm.mean, 2) AS excursion_mean_c,
       two.m ->> '$.bic' < one.m ->> '$.bic'
           AND steady.mean BETWEEN 2.5 AND 3.5 AND steady.sd < 0.5
           AND warm.mean > steady.mean + 1 AND steady.weight > 0.5 AS ok
FROM one, two, steady, warm;
