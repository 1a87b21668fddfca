-- The demo's plots, one file each: `ogive demo` draws every file in sql/plots into its
-- output directory; the `kind:` comment above the query picks steps, lines or bars.

-- Cargo temperature cdf in week 6: TR07 against the rest of the fleet
-- kind: steps
WITH RECURSIVE ps(i) AS (SELECT 0 UNION ALL SELECT i + 1 FROM ps WHERE i < 200),
grid(js) AS (SELECT json_group_array(i / 200.0) FROM ps),
q AS (
    SELECT CASE WHEN trailer = 'TR07' THEN 'TR07' ELSE 'other 11 trailers' END AS series,
           quantiles(temp_c, (SELECT js FROM grid), 1) AS qs
    FROM readings
    WHERE week = 6
    GROUP BY 1
)
SELECT j.value AS temp_c, j.key / 200.0 AS share_at_or_below, q.series
FROM q, json_each(q.qs) AS j
ORDER BY q.series DESC, j.key;
