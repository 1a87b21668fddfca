-- Two temperature regimes in the fleet's readings, found by a Gaussian mixture: steady
-- cooling near the setpoint, and the warm excursions that open doors cause (the readings
-- while a door is open and the recovery after it shuts). k = 2 asks for the two regimes;
-- sql/checks/regimes.sql checks that two components beat one by BIC. The last two queries let BIC
-- choose k, and show why the loggers' 0.1 degC steps must be said (resolution). Every query here runs
-- on SQLite and on DataFusion alike (a table function takes its value from a subquery, not from a
-- column of another table; a share is the average of a CASE, not of a comparison).

-- The two regimes of the whole fleet: share of readings, mean and spread (dist_mixture, dist_components)
SELECT c.component,
       CASE c.component WHEN 1 THEN 'steady cooling' ELSE 'door-open excursions' END AS regime,
       round(c.weight, 3) AS share,
       round(c.mean, 2) AS mean_c,
       round(c.sd, 2) AS sd_c
FROM dist_components((SELECT dist_mixture(temp_c, 2) FROM readings)) AS c
ORDER BY c.component;

-- Each reading labelled with its more probable regime, against what the logger recorded (dist_component)
WITH fit AS (SELECT dist_mixture(temp_c, 2) AS m FROM readings)
SELECT CASE dist_component(fit.m, r.temp_c) WHEN 1 THEN 'steady cooling'
                                            ELSE 'door-open excursions' END AS regime,
       count(*) AS readings,
       round(avg(r.door_open), 3) AS share_door_open,
       round(avg(CASE WHEN r.route IS NOT NULL THEN 1.0 ELSE 0.0 END), 3) AS share_on_route,
       round(min(r.temp_c), 1) AS min_c,
       round(max(r.temp_c), 1) AS max_c
FROM readings AS r, fit
WHERE r.temp_c IS NOT NULL
GROUP BY dist_component(fit.m, r.temp_c)
ORDER BY 1 DESC;

-- Share of each trailer's readings in the excursion regime: the failing unit stands out
WITH fit AS (SELECT dist_mixture(temp_c, 2) AS m FROM readings)
SELECT r.trailer,
       t.depot,
       round(avg(CASE dist_component(fit.m, r.temp_c) WHEN 2 THEN 1.0 ELSE 0.0 END), 3)
           AS share_in_excursions
FROM readings AS r JOIN trailers AS t USING (trailer), fit
WHERE r.temp_c IS NOT NULL
GROUP BY r.trailer, t.depot
ORDER BY share_in_excursions DESC, r.trailer;

-- How many regimes BIC finds in each trailer's hourly readings: taken as exact values, narrow components
-- sit on single 0.1 degC values and win; with the logger's resolution each reading is the 0.1 degC
-- interval it stands for, and BIC finds 2 regimes (3 where it splits the excursions' long warm tail)
WITH fits AS (
    SELECT trailer,
           dist_mixture(temp_c) AS as_exact,
           dist_mixture(temp_c, NULL, 0.1) AS as_logged
    FROM readings
    WHERE ts LIKE '%:00'
    GROUP BY trailer
)
SELECT trailer,
       as_exact ->> '$.k' AS k_as_exact,
       as_logged ->> '$.k' AS k_as_logged
FROM fits
ORDER BY trailer;

-- TR01's hourly readings, component by component: taken as exact, four of BIC's six components are
-- narrower than the logger's 0.1 degC step, two (sd 0.0005) sitting on single values; as logged, two regimes
SELECT 'as exact' AS taken, component, round(weight, 3) AS weight, round(mean, 2) AS mean_c,
       round(sd, 4) AS sd_c
FROM dist_components((SELECT dist_mixture(temp_c) FROM readings
                      WHERE trailer = 'TR01' AND ts LIKE '%:00'))
UNION ALL
SELECT 'as logged', component, round(weight, 3), round(mean, 2), round(sd, 4)
FROM dist_components((SELECT dist_mixture(temp_c, NULL, 0.1) FROM readings
                      WHERE trailer = 'TR01' AND ts LIKE '%:00'))
ORDER BY taken, component;
