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
       life_fit(age_km, failed, '{"keep_sample":true}') AS model,
       max(age_km) AS oldest_km
  FROM unit_life
 GROUP BY class;

-- Invented costs per class (euros per replacement), for the demo only:
-- a planned exchange at a depot against an unplanned failure in service
-- (tow, replacement bus, lost trip, the part itself).
CREATE TEMP TABLE class_cost(class TEXT PRIMARY KEY, cost_planned REAL, cost_failure REAL);
INSERT INTO class_cost VALUES ('ALT', 420, 2600), ('STM', 350, 1800), ('ACP', 900, 5200),
                              ('DRA', 260, 1100), ('CLP', 300, 1900);

-- Fleet forecasts per class: every running unit with its own distance
-- per day, so "next 30 days" becomes kilometres unit by unit.
CREATE TEMP TABLE class_forecast AS
SELECT u.class,
       count(*) AS running,
       life_forecast(m.model, u.age_km, 30 * u.km_per_day) AS next30,
       life_forecast(m.model, u.age_km, 90 * u.km_per_day) AS next90
  FROM unit_in_service AS u
  JOIN class_model AS m ON m.class = u.class
 WHERE u.km_per_day IS NOT NULL
 GROUP BY u.class;

CREATE TEMP TABLE class_policy AS
SELECT m.class, c.cost_planned, c.cost_failure,
       life_replacement(m.model, c.cost_planned, c.cost_failure, m.oldest_km) AS verdict
  FROM class_model AS m JOIN class_cost AS c ON c.class = m.class;

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
.print "Planner's table: failures expected among the units running now, spares to hold,"
.print 'and the replacement age at the invented costs (euros per planned exchange : per failure)'
SELECT m.class_name AS "component",
       f.running AS "running",
       printf('%.1f', json_extract(f.next30, '$.expected')) AS "failures 30 d",
       printf('%.1f', json_extract(f.next90, '$.expected')) AS "failures 90 d",
       json_extract(f.next90, '$.quantiles."0.95"') AS "spares 90 d (95%)",
       printf('%d : %d', p.cost_planned, p.cost_failure) AS "costs",
       CASE WHEN json_extract(p.verdict, '$.optimum') IS NULL THEN 'run to failure'
            ELSE printf('%,d km', CAST(round(json_extract(p.verdict, '$.optimum')) AS INTEGER))
       END AS "replace at",
       CASE WHEN json_extract(p.verdict, '$.optimum') IS NULL THEN '-'
            ELSE printf('%.0f%%', 100 * json_extract(p.verdict, '$.saving')) END AS "saving"
  FROM class_model AS m
  JOIN class_forecast AS f ON f.class = m.class
  JOIN class_policy AS p ON p.class = m.class
 ORDER BY m.class_name;

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
.print 'Spares: the count of failures not exceeded with 95% probability over the next 90 days.'
.print 'These results guide maintenance planning; they do not replace applicable codes and'
.print "regulations, manufacturers' requirements, or the judgement of licensed engineers."

-- The report: one self-contained HTML page written entirely by SQL, with
-- the extension's own SVG pictures embedded.
CREATE TEMP TABLE class_compare AS
SELECT class, life_compare(supplier, age_km, failed) AS comparison
  FROM unit_life GROUP BY class;
CREATE TEMP TABLE class_best AS
WITH ranking AS (SELECT class, life_fit_all(age_km, failed) AS r FROM unit_life GROUP BY class)
SELECT class, (SELECT json_extract(value, '$.dist') FROM json_each(r)
                WHERE json_extract(value, '$.rank') = 1) AS best_family
  FROM ranking;

.output target/lifedata-demo-report.html
SELECT '<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>lifedata demo report: bus components</title>
<style>
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; color: #1f2430;
       margin: 0 auto; max-width: 980px; padding: 24px; background: #fbfbfa; }
h1 { font-size: 26px; margin-bottom: 4px; } h2 { font-size: 20px; margin-top: 36px;
       border-bottom: 2px solid #0f766e; padding-bottom: 4px; }
p.note { color: #5b6270; } p.caution { background: #fff4e0; border-left: 4px solid #b7791f;
       padding: 10px 14px; }
table { border-collapse: collapse; margin: 10px 0 16px; font-size: 14px; }
td, th { border-bottom: 1px solid #dde1e6; padding: 5px 12px; text-align: left; }
th { color: #5b6270; font-weight: 600; }
svg { width: 100%; height: auto; margin: 8px 0; background: #fff; }
</style></head><body>
<h1>Component lives of an invented city-bus fleet</h1>
<p class="note">Every record behind this page is invented for the lifedata demo; no real fleet,
supplier or part is described. All figures were computed in SQL by the lifedata extension.</p>
<p class="caution">Life models guide maintenance planning; they do not certify safety. Where a
result can affect safety-critical equipment, decisions defer to the applicable codes and
regulations, the manufacturer''s requirements and the judgement of licensed engineers.</p>';

SELECT '<section><h2>' || replace(replace(m.class_name, '&', '&amp;'), '<', '&lt;') || '</h2>'
    || '<table><tr><th>lives</th><th>failures</th><th>still running or removed unfailed</th>'
    || '<th>Weibull shape (95%)</th><th>scale km</th><th>B10 km (95%)</th><th>mean km</th></tr><tr>'
    || '<td>' || m.lives || '</td><td>' || m.failures || '</td><td>' || (m.lives - m.failures) || '</td>'
    || printf('<td>%.2f (%.2f to %.2f)</td>', json_extract(m.model, '$.shape'),
              life_param_lower(m.model, 'shape'), life_param_upper(m.model, 'shape'))
    || printf('<td>%,d</td>', CAST(round(json_extract(m.model, '$.scale')) AS INTEGER))
    || printf('<td>%,d (%,d to %,d)</td>', CAST(round(life_quantile(m.model, 0.1)) AS INTEGER),
              CAST(round(life_quantile_lower(m.model, 0.1)) AS INTEGER),
              CAST(round(life_quantile_upper(m.model, 0.1)) AS INTEGER))
    || printf('<td>%,d</td>', CAST(round(life_mean(m.model)) AS INTEGER))
    || '</tr></table>'
    || '<p><b>Hazard reading:</b> '
    || CASE WHEN life_param_lower(m.model, 'shape') > 1
                 THEN 'wear-out: the failure rate rises with age'
            WHEN life_param_upper(m.model, 'shape') < 1
                 THEN 'early-life: the failure rate falls with age (look at fitting and quality)'
            ELSE 'random: failures not shown to depend on age' END
    || printf(' (failures per 10 000 km at 100 000 km: %.3f; at 300 000 km: %.3f).',
              1e4 * life_hazard(m.model, 100000), 1e4 * life_hazard(m.model, 300000))
    || ' Best-fitting family by AICc: ' || b.best_family
    || printf('. Do the suppliers differ? Likelihood-ratio test p = %.3f%s.</p>',
              json_extract(k.comparison, '$.tests.same_distribution.p_value'),
              CASE WHEN json_extract(k.comparison, '$.tests.same_distribution.p_value') < 0.05
                   THEN ' (yes, at the 5% level)' ELSE ' (no clear difference)' END)
    || life_plot_svg(m.model, m.class_name || ': lives on the Weibull probability scale',
                     'kilometres at failure or removal')
    || '<p><b>Replacement:</b> '
    || CASE WHEN json_extract(p.verdict, '$.optimum') IS NULL
            THEN 'run to failure — ' || json_extract(p.verdict, '$.reason') || '.'
            ELSE printf('replace at %,d km (planned %d : failure %d euros), saving %.0f%% of the cost per km of running to failure.',
                        CAST(round(json_extract(p.verdict, '$.optimum')) AS INTEGER),
                        p.cost_planned, p.cost_failure, 100 * json_extract(p.verdict, '$.saving'))
       END || '</p>'
    || CASE WHEN json_extract(p.verdict, '$.optimum') IS NULL THEN ''
            ELSE life_cost_svg(m.model, p.cost_planned, p.cost_failure,
                               m.class_name || ': cost per km of replacing at each age',
                               'replacement age (km)') END
    || printf('<p><b>Spares:</b> %d units running; expected failures %.1f in the next 30 days and %.1f in the next 90 days; hold %d spares to cover the next 90 days with 95%% probability.</p>',
              f.running, json_extract(f.next30, '$.expected'), json_extract(f.next90, '$.expected'),
              json_extract(f.next90, '$.quantiles."0.95"'))
    || '</section>'
  FROM class_model AS m
  JOIN class_forecast AS f ON f.class = m.class
  JOIN class_policy AS p ON p.class = m.class
  JOIN class_compare AS k ON k.class = m.class
  JOIN class_best AS b ON b.class = m.class
 ORDER BY m.class_name;
SELECT '</body></html>';
.output stdout
.print
.print 'Report written to target/lifedata-demo-report.html'
