-- Data checks on the loggers: each query is one check, and its rows pass when ok is true.

-- every trailer logged at least 99% of its 5-minute readings
SELECT trailer,
       count(temp_c) AS logged,
       count(*) AS expected,
       count(temp_c) >= 0.99 * count(*) AS ok
FROM readings
GROUP BY trailer;

-- no reading outside the logger's range of -30 to 40 degC
SELECT count(*) AS outside, count(*) = 0 AS ok
FROM readings
WHERE temp_c < -30 OR temp_c > 40;
