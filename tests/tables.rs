//! Table-valued functions on a bundled SQLite: curves and probability-plot
//! rows, checked against the readers, scipy's exact median ranks and the
//! families' published probability-plot linearisations.

use rusqlite::Connection;

mod common;

fn conn() -> Connection {
    let c = Connection::open_in_memory().unwrap();
    lifedata::register(&c).unwrap();
    c
}

/// Curve rows agree with the scalar readers at every age, log and linear.
#[test]
fn curve_rows_match_the_readers() {
    let c = conn();
    let m = r#"{"dist":"lognormal","mu":7,"sigma":0.6}"#;
    for spacing in ["linear", "log"] {
        let mut stmt = c
            .prepare(
                "SELECT age, unreliability, reliability, density, hazard,
                        life_cdf(?1, age), life_reliability(?1, age), life_pdf(?1, age), life_hazard(?1, age)
                   FROM life_curve(?1, 10, 5000, 30, ?2)",
            )
            .unwrap();
        let rows: Vec<[f64; 9]> = stmt
            .query_map(rusqlite::params![m, spacing], |r| {
                let mut v = [0.0; 9];
                for (i, slot) in v.iter_mut().enumerate() {
                    *slot = r.get(i)?;
                }
                Ok(v)
            })
            .unwrap()
            .map(Result::unwrap)
            .collect();
        assert_eq!(rows.len(), 30);
        assert_eq!(rows[0][0], 10.0);
        assert!((rows[29][0] - 5000.0).abs() < 1e-9);
        for r in &rows {
            for k in 1..5 {
                assert_eq!(r[k], r[k + 4], "{spacing} at {}", r[0]);
            }
        }
        if spacing == "log" {
            let ratio = rows[1][0] / rows[0][0];
            assert!((rows[2][0] / rows[1][0] - ratio).abs() < 1e-12);
        }
    }
    // Bounds appear when the model has a covariance, and bracket the estimate.
    let n: i64 = c
        .query_row(
            "WITH m(m) AS (SELECT life_fit(column1, 1)
                             FROM (VALUES (12.0),(30.5),(41.0),(60.2),(75.9),(99.0)))
             SELECT count(*) FROM life_curve((SELECT m FROM m), 1, 120, 12)
              WHERE reliability_lower <= reliability AND reliability <= reliability_upper",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(n, 12);
}

/// Source: exact median ranks from scipy.special.betaincinv (n = 20, in
/// fixtures/reference/breadth/median_ranks.json); Weibull plot axes
/// x = ln t, y = ln(-ln(1 - F)) (the Weibull probability paper's
/// linearisation, e.g. Nelson, Applied Life Data Analysis, 1982, from
/// memory). Every failure row's position, x and y, and the fitted line,
/// computed independently here.
#[test]
fn plot_points_sit_on_the_published_axes() {
    let refs = common::load("fixtures/reference/breadth/median_ranks.json");
    let exact: Vec<f64> = refs["exact"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["n"] == 20)
        .map(|e| common::f(&e["rank"]))
        .collect();
    assert_eq!(exact.len(), 20);
    let c = conn();
    c.execute_batch(
        "CREATE TABLE life(age REAL);
         WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < 20)
         INSERT INTO life SELECT 100.0 * i + i * i FROM k;
         CREATE TABLE m AS SELECT life_fit(age, 1, '{\"keep_sample\":true}') AS m FROM life;",
    )
    .unwrap();
    let (shape, scale): (f64, f64) = c
        .query_row(
            "SELECT json_extract(m, '$.shape'), json_extract(m, '$.scale') FROM m",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    let mut stmt = c
        .prepare(
            "SELECT age, position, x, y, fit_y FROM life_plot_points((SELECT m FROM m), 0.95, 'exact')
              WHERE kind = 'failure' ORDER BY age",
        )
        .unwrap();
    let rows: Vec<(f64, f64, f64, f64, f64)> = stmt
        .query_map([], |r| {
            Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
        })
        .unwrap()
        .map(Result::unwrap)
        .collect();
    assert_eq!(rows.len(), 20);
    for (i, (age, pos, x, y, fit_y)) in rows.iter().enumerate() {
        assert!(
            (pos - exact[i]).abs() < 1e-13,
            "rank {i}: {pos} vs {}",
            exact[i]
        );
        assert!((x - age.ln()).abs() < 1e-13);
        assert!((y - (-(1.0 - pos).ln()).ln()).abs() < 1e-12);
        // The fitted line: y = shape * (ln t - ln scale).
        assert!((fit_y - shape * (age.ln() - scale.ln())).abs() < 1e-9);
    }
    // Suspensions are listed for the event chart; line rows span the data.
    let (lines, lo, hi): (i64, f64, f64) = c
        .query_row(
            "SELECT count(*), min(age), max(age) FROM life_plot_points((SELECT m FROM m)) WHERE kind = 'line'",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    assert!(lines > 10 && lo < 101.0 && hi > 2400.0);
}

/// The picture functions return self-contained SVG that parses as XML,
/// with one marker per failure and the optimum marked on the cost curve.
#[test]
fn svg_functions_return_parseable_pictures() {
    let c = conn();
    c.execute_batch(
        "CREATE TABLE life(age REAL, failed INT);
         INSERT INTO life VALUES (17.88,1),(28.92,1),(33.00,1),(41.52,1),(42.12,1),(45.60,1),
           (48.48,1),(51.84,1),(51.96,1),(54.12,1),(55.56,1),(67.80,1),(68.64,1),(68.64,1),
           (68.88,1),(84.12,1),(93.12,1),(98.64,1),(105.12,1),(105.84,1),(127.92,1),(128.04,1),
           (173.40,1),(60,0),(80,0);",
    )
    .unwrap();
    let svg: String = c
        .query_row(
            "SELECT life_plot_svg(life_fit(age, failed, '{\"keep_sample\":true}'),
                                  'Bearings <&> \"test\"', 'million revolutions') FROM life",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    let class_count = |class: &str| {
        doc.descendants()
            .filter(|n| {
                n.attribute("class")
                    .is_some_and(|c| c.split(' ').any(|x| x == class))
            })
            .count()
    };
    assert_eq!(class_count("failure"), 23);
    assert!(class_count("suspension") >= 2);
    assert!(svg.contains("Bearings &lt;&amp;&gt;"));
    let cost: String = c
        .query_row(
            "SELECT life_cost_svg(life_fit(age, failed), 1, 10) FROM life",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let doc = roxmltree::Document::parse(&cost).unwrap();
    assert!(doc
        .descendants()
        .any(|n| n.attribute("class").is_some_and(|c| c.contains("optimum"))));
    // NULL in, NULL out.
    let none: Option<String> = c
        .query_row("SELECT life_plot_svg(NULL)", [], |r| r.get(0))
        .unwrap();
    assert!(none.is_none());
}

/// The forecast aggregate over units in service, per class by a join: its
/// expected count is the sum of the units' conditional failure
/// probabilities, its variance the sum of p(1-p) (Poisson-binomial; the
/// distribution itself is checked against numpy in reference_forecast.rs).
#[test]
fn forecast_per_class_by_join() {
    let c = conn();
    c.execute_batch(
        "CREATE TABLE model(class TEXT, m TEXT);
         INSERT INTO model VALUES ('ALT', '{\"dist\":\"weibull\",\"shape\":3,\"scale\":450000}'),
                                  ('DOOR', '{\"dist\":\"lognormal\",\"mu\":13,\"sigma\":0.9}');
         CREATE TABLE running(class TEXT, age_km REAL, km_per_day REAL);
         WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < 400)
         INSERT INTO running SELECT CASE WHEN i % 3 THEN 'ALT' ELSE 'DOOR' END,
                                    (i * 7919) % 600000, 150 + i % 200 FROM k;",
    )
    .unwrap();
    let mut stmt = c
        .prepare(
            "SELECT r.class, life_forecast(m.m, r.age_km, 30 * r.km_per_day),
                    sum(life_cond_fail(m.m, r.age_km, 30 * r.km_per_day)),
                    sum(life_cond_fail(m.m, r.age_km, 30 * r.km_per_day)
                        * (1 - life_cond_fail(m.m, r.age_km, 30 * r.km_per_day))),
                    count(*)
               FROM running r JOIN model m USING (class) GROUP BY r.class ORDER BY r.class",
        )
        .unwrap();
    let rows: Vec<(String, String, f64, f64, i64)> = stmt
        .query_map([], |r| {
            Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
        })
        .unwrap()
        .map(Result::unwrap)
        .collect();
    assert_eq!(rows.len(), 2);
    for (class, f, mean, var, n) in rows {
        let v: serde_json::Value = serde_json::from_str(&f).unwrap();
        assert_eq!(v["units"], n, "{class}");
        assert!(
            (v["expected"].as_f64().unwrap() - mean).abs() < 1e-9 * mean.max(1.0),
            "{class}"
        );
        assert!(
            (v["sd"].as_f64().unwrap() - var.sqrt()).abs() < 1e-9,
            "{class}"
        );
        let q95 = v["quantiles"]["0.95"].as_u64().unwrap() as f64;
        assert!(
            q95 >= mean && q95 <= mean + 4.0 * var.sqrt() + 1.0,
            "{class}: {q95}"
        );
    }
}
