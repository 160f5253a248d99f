-- lifedata demo: life data analysis of an INVENTED city-bus fleet.
--
-- Run from the repository root:
--
--     cargo build --release -p lifedata-ext && sqlite3 < sql/demo.sql
--
-- Builds an in-memory database from sql/schema.sql and the invented CSV
-- records in fixtures/demo/ (made by fixtures/demo/make_demo_data.py),
-- creates the views of sql/views.sql, and prints, per component class, a
-- Weibull fit of the unit lives (in km) and what it implies.  Every number
-- is computed in SQL by the lifedata functions.
--
-- Reading of the Weibull shape: the 95% range of the shape is taken from
-- the fit's covariance (normal on the log of the shape).  "wear-out" when
-- the whole range lies above 1, "early-life" when it lies below 1, and
-- "random" when it contains 1 (failures not shown to depend on age).  A
-- model without a covariance falls back to the point estimate: below 0.95
-- early-life, 0.95 to 1.05 random, above 1.05 wear-out.

.bail on
.load ./target/release/liblifedata

.read sql/schema.sql
.import --csv --skip 1 fixtures/demo/depot.csv depot
.import --csv --skip 1 fixtures/demo/bus.csv bus
.import --csv --skip 1 fixtures/demo/component_class.csv component_class
.import --csv --skip 1 fixtures/demo/supplier.csv supplier
.import --csv --skip 1 fixtures/demo/position.csv position
.import --csv --skip 1 fixtures/demo/unit.csv unit
.import --csv --skip 1 fixtures/demo/fitment.csv fitment
.import --csv --skip 1 fixtures/demo/removal_reason.csv removal_reason
.import --csv --skip 1 fixtures/demo/removal.csv removal
.import --csv --skip 1 fixtures/demo/odometer_reading.csv odometer_reading
.import --csv --skip 1 fixtures/demo/snapshot.csv snapshot
.read sql/views.sql

-- One Weibull model per class, fitted once and read by the tables below.
CREATE TEMP TABLE class_model AS
SELECT class, class_name, count(*) AS lives, sum(failed) AS failures,
       life_fit(age_km, failed) AS model
  FROM unit_life
 GROUP BY class;

CREATE TEMP TABLE class_shape AS
SELECT class,
       json_extract(model, '$.shape') AS shape,
       CASE WHEN json_extract(model, '$.cov.params[0]') = 'shape'
            THEN sqrt(json_extract(model, '$.cov.matrix[0][0]'))
                 / json_extract(model, '$.shape') END AS rel_se
  FROM class_model;

.mode list
.headers off
.print
.print 'lifedata demo - Weibull life of bus components (lives in km)'
.print 'THE DATA ARE INVENTED: an imaginary city-bus operator, not a real fleet or supplier.'
SELECT 'Records: ' || (SELECT count(*) FROM bus) || ' buses, '
       || (SELECT count(*) FROM unit_life) || ' unit lives, '
       || (SELECT count(*) FROM unit_life WHERE ended_how = 'in service')
       || ' still in service at the snapshot of '
       || (SELECT taken_at FROM snapshot) || '; record problems found: '
       || (SELECT count(*) FROM record_problem) || '.';
.print

.mode box
.headers on
.print 'Life model per component class'
SELECT m.class_name AS "component",
       m.lives AS "lives",
       m.failures AS "failures",
       printf('%.2f', s.shape) AS "shape",
       CASE WHEN s.rel_se IS NULL THEN '-'
            ELSE printf('%.2f-%.2f', s.shape * exp(-1.96 * s.rel_se),
                        s.shape * exp(1.96 * s.rel_se)) END AS "95% range",
       CASE WHEN s.rel_se IS NOT NULL THEN
                 CASE WHEN s.shape * exp(-1.96 * s.rel_se) > 1 THEN 'wear-out'
                      WHEN s.shape * exp(1.96 * s.rel_se) < 1 THEN 'early-life'
                      ELSE 'random' END
            WHEN s.shape < 0.95 THEN 'early-life'
            WHEN s.shape <= 1.05 THEN 'random'
            ELSE 'wear-out' END AS "reading",
       printf('%,d', CAST(round(json_extract(m.model, '$.scale')) AS INTEGER))
           AS "scale km",
       printf('%,d', CAST(round(life_quantile(m.model, 0.1)) AS INTEGER))
           AS "B10 km",
       printf('%,d', CAST(round(life_mean(m.model)) AS INTEGER)) AS "mean km"
  FROM class_model AS m
  JOIN class_shape AS s ON s.class = m.class
 ORDER BY m.class_name;

.print
.print 'Oldest running unit of each class, and replacement age in km at planned : failure cost 1:3 and 1:10'
WITH oldest AS (
    SELECT class, fleet_no, position, age_km, km_per_day,
           row_number() OVER (PARTITION BY class
                              ORDER BY age_km DESC, fitment_id) AS rank_by_age
      FROM unit_in_service
),
raw AS (
    SELECT m.class_name, o.fleet_no, o.position, o.age_km,
           30 * o.km_per_day AS horizon_km,
           life_cond_fail(m.model, o.age_km, 30 * o.km_per_day) AS p30,
           life_replace_age(m.model, 1, 3) AS replace_3,
           life_replace_age(m.model, 1, 10) AS replace_10
      FROM class_model AS m
      LEFT JOIN oldest AS o ON o.class = m.class AND o.rank_by_age = 1
)
SELECT class_name AS "component",
       coalesce(fleet_no || ' ' || position, '-') AS "oldest running unit",
       CASE WHEN age_km IS NULL THEN '-'
            ELSE printf('%,d', CAST(round(age_km) AS INTEGER)) END AS "age km",
       CASE WHEN horizon_km IS NULL THEN '-'
            ELSE printf('%,d', CAST(round(horizon_km) AS INTEGER)) END
           AS "30 days km",
       CASE WHEN p30 IS NULL THEN '-'
            ELSE printf('%.1f%%', 100 * p30) END AS "P fail 30 d",
       CASE WHEN replace_3 IS NULL THEN 'none'
            ELSE printf('%,d', CAST(round(replace_3) AS INTEGER)) END
           AS "replace 1:3",
       CASE WHEN replace_10 IS NULL THEN 'none'
            ELSE printf('%,d', CAST(round(replace_10) AS INTEGER)) END
           AS "replace 1:10"
  FROM raw
 ORDER BY class_name;

.print
.print 'By supplier (fitted only where a supplier has at least 5 failures)'
WITH counts AS (
    SELECT class_name, supplier, count(*) AS lives, sum(failed) AS failures
      FROM unit_life
     GROUP BY class_name, supplier
),
fits AS (
    SELECT l.class_name, l.supplier, life_fit(l.age_km, l.failed) AS model
      FROM unit_life AS l
      JOIN counts AS c ON c.class_name = l.class_name
                      AND c.supplier = l.supplier AND c.failures >= 5
     GROUP BY l.class_name, l.supplier
)
SELECT c.class_name AS "component", c.supplier AS "supplier",
       c.lives AS "lives", c.failures AS "failures",
       CASE WHEN f.model IS NULL THEN '-'
            ELSE printf('%.2f', json_extract(f.model, '$.shape')) END AS "shape",
       CASE WHEN f.model IS NULL THEN 'too few failures'
            ELSE printf('%,d', CAST(round(json_extract(f.model, '$.scale'))
                                    AS INTEGER)) END AS "scale km",
       CASE WHEN f.model IS NULL THEN '-'
            ELSE printf('%,d', CAST(round(life_quantile(f.model, 0.1))
                                    AS INTEGER)) END AS "B10 km"
  FROM counts AS c
  LEFT JOIN fits AS f ON f.class_name = c.class_name AND f.supplier = c.supplier
 ORDER BY c.class_name, c.supplier;

.mode list
.headers off
.print
.print 'Shape reading: "wear-out" if the 95% range of the shape lies above 1, "early-life"'
.print 'if below 1, "random" if it contains 1. B10 = age by which 10% are expected to fail.'
.print '"replace" = age-replacement interval minimising cost per km ("none": no finite optimum).'
.print 'These results guide maintenance planning; they do not replace applicable codes and'
.print "regulations, manufacturers' requirements, or the judgement of licensed engineers."
