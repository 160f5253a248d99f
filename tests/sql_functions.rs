//! The SQL layer on an in-memory bundled SQLite: NULL handling, errors that
//! name the function and value, aggregates as window functions, caching of
//! parsed models, and use in views and generated columns with
//! trusted_schema off.

use rusqlite::{Connection, Error};

const M: &str = r#"'{"dist":"weibull","shape":2,"scale":1000}'"#;

fn conn() -> Connection {
    let c = Connection::open_in_memory().unwrap();
    lifedata::register(&c).unwrap();
    c
}

fn one<T: rusqlite::types::FromSql>(c: &Connection, sql: &str) -> T {
    c.query_row(sql, [], |r| r.get(0))
        .unwrap_or_else(|e| panic!("{sql}: {e}"))
}

fn err(c: &Connection, sql: &str) -> String {
    match c.query_row(sql, [], |r| r.get::<_, rusqlite::types::Value>(0)) {
        Ok(v) => panic!("{sql}: expected an error, got {v:?}"),
        Err(Error::SqliteFailure(_, Some(msg))) => msg,
        Err(e) => e.to_string(),
    }
}

/// Every line of tests/cases/bad_input.tsv is an SQL error containing the
/// expected text (function name first, then the offending value).
#[test]
fn bad_input_table() {
    let c = conn();
    let table = include_str!("cases/bad_input.tsv");
    let mut count = 0;
    for line in table
        .lines()
        .filter(|l| !l.starts_with('#') && !l.is_empty())
    {
        let (sql, want) = line.split_once('\t').unwrap();
        let sql = sql.replace("$M", M);
        let msg = err(&c, &sql);
        assert!(msg.contains(want), "{sql}\n  got:  {msg}\n  want: {want}");
        count += 1;
    }
    assert!(count >= 50, "{count}");
}

#[test]
fn null_in_null_out() {
    let c = conn();
    for sql in [
        "SELECT life_quantile(NULL, 0.1)".to_string(),
        format!("SELECT life_quantile({M}, NULL)"),
        format!("SELECT life_cdf({M}, NULL)"),
        "SELECT life_cdf(NULL, 3)".into(),
        format!("SELECT life_reliability({M}, NULL)"),
        format!("SELECT life_pdf({M}, NULL)"),
        format!("SELECT life_hazard({M}, NULL)"),
        "SELECT life_mean(NULL)".into(),
        format!("SELECT life_cond_fail({M}, NULL, 5)"),
        format!("SELECT life_cond_fail({M}, 5, NULL)"),
        format!("SELECT life_replace_age({M}, NULL, 5)"),
        format!("SELECT life_replace_age({M}, 1, NULL)"),
        "SELECT life_replace_age(NULL, 1, 5)".into(),
        "SELECT life_usage(NULL, '2024-01-01')".into(),
        "SELECT life_usage('2024-01-01', NULL)".into(),
        "SELECT life_usage('2024-01-01', '2024-02-01', NULL)".into(),
        format!("SELECT life_param_lower({M}, NULL)"),
        "SELECT life_param_upper(NULL, 'shape')".into(),
        format!("SELECT life_quantile_lower({M}, 0.1, NULL)"),
        format!("SELECT life_quantile_upper({M}, 0.1, 0.9, NULL)"),
        format!("SELECT life_reliability_lower({M}, 10, 0.9, 2, NULL)"),
        format!("SELECT life_reliability_upper({M}, NULL)"),
        // Aggregates: no rows, or only NULL ages, give NULL as avg() does.
        "SELECT life_fit_interval(NULL, NULL) FROM (SELECT 1)".into(),
        "SELECT life_fit_interval(5, NULL, 0, NULL) FROM (SELECT 1)".into(),
        "SELECT life_fit_all(a, 1) FROM (SELECT 1 a) WHERE a > 5".into(),
        "SELECT life_km(NULL, 1) FROM (SELECT 1)".into(),
        "SELECT life_compare(NULL, 5, 1) FROM (SELECT 1)".into(),
        "SELECT life_fit(a, 1) FROM (SELECT 1 a) WHERE a > 5".into(),
        "SELECT life_fit(NULL, 1) FROM (SELECT 1)".into(),
        // A NULL model with a bad second argument is still an error? No:
        // the argument is checked first, so NULL only where all else is valid.
    ] {
        let v: Option<f64> = one(&c, &sql);
        assert_eq!(v, None, "{sql}");
    }
}

#[test]
fn fit_skips_null_ages_and_counts_them() {
    let c = conn();
    c.execute_batch(
        "CREATE TABLE life(age REAL, failed INT);
         INSERT INTO life VALUES (100,1),(150,1),(220,0),(NULL,1),(300,1),(NULL,0),(410,0),(90,0);",
    )
    .unwrap();
    let m: String = one(&c, "SELECT life_fit(age, failed) FROM life");
    let with_nulls: serde_json::Value = serde_json::from_str(&m).unwrap();
    assert_eq!(with_nulls["skipped"], 2);
    assert_eq!(with_nulls["n"], 6);
    assert_eq!(with_nulls["failures"], 3);
    assert_eq!(with_nulls["suspensions"], 3);
    assert_eq!(with_nulls["dist"], "weibull");
    assert_eq!(with_nulls["model_version"], 1);
    let m2: String = one(
        &c,
        "SELECT life_fit(age, failed, '{\"dist\":\"weibull\"}') FROM life WHERE age IS NOT NULL",
    );
    let v2: serde_json::Value = serde_json::from_str(&m2).unwrap();
    assert_eq!(with_nulls["shape"], v2["shape"]);
    assert_eq!(v2["skipped"], 0);
    // The model reads back through json_extract and through the readers.
    let shape: f64 = one(&c, &format!("SELECT json_extract('{m}', '$.shape')"));
    assert_eq!(shape, with_nulls["shape"].as_f64().unwrap());
    let var: f64 = one(
        &c,
        &format!("SELECT json_extract('{m}', '$.cov.matrix[0][0]')"),
    );
    assert!(var > 0.0);
}

/// Row order must not change the fit by a single bit (deterministic functions).
#[test]
fn fit_is_independent_of_row_order() {
    let c = conn();
    c.execute_batch(
        "CREATE TABLE life(age REAL, failed INT);
         WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < 2000)
         INSERT INTO life SELECT (i * 7919 % 1000) + 0.5 * (i % 3), (i % 4 = 0) FROM k;",
    )
    .unwrap();
    let a: String = one(
        &c,
        "SELECT life_fit(age, failed) FROM (SELECT * FROM life ORDER BY age)",
    );
    let b: String = one(
        &c,
        "SELECT life_fit(age, failed) FROM (SELECT * FROM life ORDER BY age DESC)",
    );
    let d: String = one(
        &c,
        "SELECT life_fit(age, failed) FROM (SELECT * FROM life ORDER BY (rowid * 31) % 97)",
    );
    assert_eq!(a, b);
    assert_eq!(a, d);
}

/// As a window function, each frame's model equals the aggregate over the
/// same rows, for growing and for sliding frames (rows leave via inverse).
#[test]
fn fit_as_window_function_matches_grouped_fits() {
    let c = conn();
    c.execute_batch(
        "CREATE TABLE life(id INTEGER PRIMARY KEY, grp TEXT, age REAL, failed INT);
         WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < 60)
         INSERT INTO life SELECT i, CASE WHEN i % 2 THEN 'a' ELSE 'b' END,
                                (i * 37 % 50) + 1, (i % 3 <> 0) FROM k;
         UPDATE life SET age = NULL WHERE id = 17;",
    )
    .unwrap();
    let mut stmt = c
        .prepare(
            "SELECT id, life_fit(age, failed) OVER (ORDER BY id ROWS BETWEEN 5 PRECEDING AND 5 FOLLOWING)
             FROM life ORDER BY id",
        )
        .unwrap();
    let rows: Vec<(i64, String)> = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect();
    assert_eq!(rows.len(), 60);
    for (id, model) in &rows {
        let direct: String = one(
            &c,
            &format!(
                "SELECT life_fit(age, failed) FROM (SELECT * FROM life WHERE id BETWEEN {} AND {} ORDER BY id)",
                id - 5,
                id + 5
            ),
        );
        assert_eq!(model, &direct, "frame ending at {id}");
    }
    // Grouped by a column, one model per group, and the same per partition.
    let grouped: Vec<String> = c
        .prepare("SELECT life_fit(age, failed) FROM life GROUP BY grp ORDER BY grp")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .map(Result::unwrap)
        .collect();
    let windowed: Vec<String> = c
        .prepare(
            "SELECT DISTINCT life_fit(age, failed) OVER (PARTITION BY grp) FROM life ORDER BY grp",
        )
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .map(Result::unwrap)
        .collect();
    assert_eq!(grouped.len(), 2);
    assert_eq!(grouped, windowed);
}

/// A constant model is parsed once per statement, not once per row
/// (SQLite auxiliary data), however many rows the reader runs over.
#[test]
fn constant_model_is_parsed_once_per_statement() {
    let c = conn();
    c.execute_batch(
        "CREATE TABLE t(x REAL);
         WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < 10000)
         INSERT INTO t SELECT i FROM k;",
    )
    .unwrap();
    let before = lifedata::model::parses_on_this_thread();
    let total: f64 = one(&c, &format!("SELECT sum(life_reliability({M}, x)) FROM t"));
    let parses = lifedata::model::parses_on_this_thread() - before;
    assert!(total > 0.0);
    assert!(parses <= 2, "parsed {parses} times for 10000 rows");
}

/// Deterministic + innocuous: usable in views, indexes and generated
/// columns of a schema that is not trusted.
#[test]
fn works_in_untrusted_schema_objects() {
    let c = conn();
    c.execute_batch(&format!(
        "PRAGMA trusted_schema = OFF;
         CREATE TABLE fitment(id INTEGER PRIMARY KEY, fitted TEXT, removed TEXT, failed INT,
             hours REAL GENERATED ALWAYS AS (life_usage(fitted, removed)) STORED);
         CREATE INDEX fitment_days ON fitment(life_usage(fitted, removed, 'days'));
         CREATE VIEW fleet_model AS SELECT life_fit(hours, failed) AS m FROM fitment;
         CREATE VIEW reading AS SELECT life_reliability({M}, hours) AS r FROM fitment;
         CREATE TRIGGER keep_check AFTER INSERT ON fitment
           WHEN life_usage(NEW.fitted, NEW.removed) > 1e7 BEGIN SELECT RAISE(ABORT, 'too long'); END;
         INSERT INTO fitment(fitted, removed, failed) VALUES
           ('2024-01-01', '2024-01-11', 1), ('2024-01-01', '2024-02-01', 1),
           ('2024-01-05 06:00', '2024-03-01', 0), ('2024-02-01', '2024-02-21T12:00:00Z', 1);"
    ))
    .unwrap();
    let hours: f64 = one(&c, "SELECT hours FROM fitment WHERE id = 1");
    assert_eq!(hours, 240.0);
    let n: i64 = one(&c, "SELECT json_extract(m, '$.n') FROM fleet_model");
    assert_eq!(n, 4);
    let r: f64 = one(&c, "SELECT r FROM reading LIMIT 1");
    assert!((r - (-(240.0f64 / 1000.0).powi(2)).exp()).abs() < 1e-15);
    let days: f64 = one(
        &c,
        "SELECT life_usage(fitted, removed, 'days') FROM fitment INDEXED BY fitment_days WHERE life_usage(fitted, removed, 'days') > 20 ORDER BY 1 LIMIT 1",
    );
    assert_eq!(days, 20.5);
}

/// life_usage: the forms SQLite stores timestamps in give the same spans.
/// Reference: SQLite's own julianday() on the same values.
#[test]
fn usage_matches_sqlite_julianday() {
    let c = conn();
    for (a, b) in [
        ("'2021-03-04 07:15:00'", "'2024-11-30 18:40:12.5'"),
        ("'2021-03-04'", "'2021-03-05T00:00:00+01:00'"),
        ("2459000.5", "2460000.25"),
        ("'2020-02-28T23:00:00-02:00'", "'2020-03-01 00:00Z'"),
    ] {
        let ours: f64 = one(&c, &format!("SELECT life_usage({a}, {b}, 'days')"));
        let theirs: f64 = one(&c, &format!("SELECT julianday({b}) - julianday({a})"));
        assert!((ours - theirs).abs() < 1e-8, "{a} {b}: {ours} vs {theirs}");
    }
    // Unix seconds (beyond the Julian-day range) against unixepoch().
    let secs: f64 = one(
        &c,
        "SELECT life_usage(unixepoch('2024-01-01'), unixepoch('2024-01-02 06:00'), 'seconds')",
    );
    assert_eq!(secs, 108_000.0);
    for (unit, v) in [
        ("seconds", 86400.0),
        ("minutes", 1440.0),
        ("hours", 24.0),
        ("days", 1.0),
    ] {
        let got: f64 = one(
            &c,
            &format!("SELECT life_usage('2024-06-01', '2024-06-02', '{unit}')"),
        );
        assert_eq!(got, v);
    }
    let default: f64 = one(&c, "SELECT life_usage('2024-06-01', '2024-06-02')");
    assert_eq!(default, 24.0);
}

/// Extreme but valid models and arguments never crash, hang or panic: each
/// call returns a number, NULL, or an error that names the function.
#[test]
fn extreme_values_never_panic() {
    let c = conn();
    let tiny_big = [
        "1e-300", "1e-10", "0.01", "1", "50", "1e10", "1e300", "5e-324",
    ];
    let ages = [
        "0",
        "5e-324",
        "1e-300",
        "1",
        "1e300",
        "1.7976931348623157e308",
    ];
    let probs = ["0", "5e-324", "1e-300", "0.5", "0.9999999999999999"];
    let mut calls = 0;
    for shape in tiny_big {
        for scale in tiny_big {
            let m = format!(r#"'{{"dist":"weibull","shape":{shape},"scale":{scale}}}'"#);
            let mut sqls = vec![
                format!("SELECT life_mean({m})"),
                format!("SELECT life_replace_age({m}, 1, 10)"),
                format!("SELECT life_replace_age({m}, 1, 1e300)"),
            ];
            for t in ages {
                for f in ["life_cdf", "life_reliability", "life_pdf", "life_hazard"] {
                    sqls.push(format!("SELECT {f}({m}, {t})"));
                }
                for h in ages {
                    sqls.push(format!("SELECT life_cond_fail({m}, {t}, {h})"));
                }
            }
            for p in probs {
                sqls.push(format!("SELECT life_quantile({m}, {p})"));
            }
            for sql in sqls {
                calls += 1;
                match c.query_row(&sql, [], |r| r.get::<_, Option<f64>>(0)) {
                    Ok(_) => {}
                    Err(Error::SqliteFailure(_, Some(msg))) => {
                        assert!(msg.starts_with("life_"), "{sql}: {msg}");
                        assert!(!msg.contains("panic"), "{sql}: {msg}");
                    }
                    Err(e) => panic!("{sql}: {e}"),
                }
            }
        }
    }
    eprintln!("{calls} extreme calls answered");
}

/// Hostile data sets for the fit: extreme spans of age, near-degenerate
/// failure patterns, huge tie counts. Each gives a model or a named error.
#[test]
fn hostile_fits_give_a_model_or_a_named_error() {
    let c = conn();
    for rows in [
        "(1e-300,1),(1e300,1)",
        "(1e-300,1),(2e-300,1),(1e300,0)",
        "(5e-324,1),(1e-323,1)",
        "(1,1),(1.0000000000000002,1)",
        "(1,1),(1.0000000000000002,0)",
        "(0,0),(0,0),(3,1),(4,1)",
        "(1e308,1),(1.7976931348623157e308,1)",
        "(10,1),(10,1),(10,1),(11,0)",
        "(1,1),(1e6,0),(1e6,0),(1e6,0)",
    ] {
        let sql = format!("SELECT life_fit(a, f) FROM (VALUES {rows}) AS v(a, f)");
        let sql = sql.replace("AS v(a, f)", "");
        let sql = sql.replace("life_fit(a, f)", "life_fit(column1, column2)");
        match c.query_row(&sql, [], |r| r.get::<_, Option<String>>(0)) {
            Ok(Some(m)) => {
                let v: serde_json::Value = serde_json::from_str(&m).unwrap();
                let shape = v["shape"].as_f64().unwrap();
                assert!(shape.is_finite() && shape > 0.0, "{rows}: {m}");
                // The model it wrote must read back.
                let b10: Option<f64> = c
                    .query_row("SELECT life_quantile(?1, 0.1)", [&m], |r| r.get(0))
                    .unwrap();
                assert!(b10.is_some(), "{rows}");
            }
            Ok(None) => panic!("{rows}: NULL"),
            Err(Error::SqliteFailure(_, Some(msg))) => {
                assert!(msg.starts_with("life_fit: "), "{rows}: {msg}");
                assert!(!msg.contains("panic"), "{rows}: {msg}");
            }
            Err(e) => panic!("{rows}: {e}"),
        }
    }
    // A million tied rows merge into two groups.
    let m: String = one(
        &c,
        "WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < 1000000)
         SELECT life_fit(CASE WHEN i % 3 = 0 THEN 100 ELSE 250 END, i % 3 = 0 OR i % 7 = 0) FROM k",
    );
    let v: serde_json::Value = serde_json::from_str(&m).unwrap();
    assert_eq!(v["n"], 1_000_000);
}

/// Grouped records: a count per row gives exactly the fit of the expanded
/// rows, for every family, estimator and censoring kind (counts merge into
/// the same sample as repeated rows, so the models agree to the last bit).
#[test]
fn counts_give_the_fit_of_expanded_rows() {
    let c = conn();
    c.execute_batch(
        "CREATE TABLE grouped(earliest REAL, latest REAL, entry REAL, n INT);
         INSERT INTO grouped VALUES
           (120, 120, 0, 3), (150, 150, 0, 1), (210, 210, 0, 2), (260, 260, 0, 1),
           (330, 330, 0, 2), (400, 400, 0, 1), (50, NULL, 0, 288), (300, NULL, 0, 40),
           (500, NULL, 0, 25);
         CREATE TABLE censored(earliest REAL, latest REAL, entry REAL, n INT);
         INSERT INTO censored VALUES
           (NULL, 100, 0, 4), (100, 200, 0, 12), (200, 300, 0, 9), (300, 400, 0, 5),
           (150, 150, 0, 1), (400, NULL, 0, 30), (250, NULL, 100, 6), (180, 180, 60, 2);
         CREATE TABLE expanded(earliest REAL, latest REAL, entry REAL);
         CREATE TABLE expanded_c(earliest REAL, latest REAL, entry REAL);
         WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < 300)
         INSERT INTO expanded SELECT earliest, latest, entry FROM grouped, k WHERE k.i <= grouped.n;
         WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < 300)
         INSERT INTO expanded_c SELECT earliest, latest, entry FROM censored, k WHERE k.i <= censored.n;",
    )
    .unwrap();
    let families = [
        "weibull",
        "weibull3",
        "exponential",
        "lognormal",
        "normal",
        "loglogistic",
        "gamma",
    ];
    let mut compared = 0;
    for fam in families {
        for method in ["mle", "rank_y", "rank_x"] {
            for (grouped, expanded) in [("grouped", "expanded"), ("censored", "expanded_c")] {
                if method != "mle" && grouped == "censored" {
                    continue; // rank regression needs exact failure ages
                }
                let opts = format!(r#"'{{"dist":"{fam}","method":"{method}"}}'"#);
                let a = c.query_row(
                    &format!("SELECT life_fit_interval(earliest, latest, entry, n, {opts}) FROM {grouped}"),
                    [],
                    |r| r.get::<_, String>(0),
                );
                let b = c.query_row(
                    &format!("SELECT life_fit_interval(earliest, latest, entry, 1, {opts}) FROM {expanded}"),
                    [],
                    |r| r.get::<_, String>(0),
                );
                match (a, b) {
                    (Ok(a), Ok(b)) => {
                        assert_eq!(a, b, "{fam} {method} {grouped}");
                        compared += 1;
                    }
                    (Err(a), Err(b)) => assert_eq!(a.to_string(), b.to_string()),
                    (a, b) => panic!("{fam} {method} {grouped}: {a:?} vs {b:?}"),
                }
            }
        }
    }
    assert!(compared >= 20, "{compared}");
    let km_a: String = one(
        &c,
        "SELECT life_km_interval(earliest, latest, entry, n) FROM grouped",
    );
    let km_b: String = one(
        &c,
        "SELECT life_km_interval(earliest, latest, entry) FROM expanded",
    );
    assert_eq!(km_a, km_b);
    // The plain (age, failed) form gives the same model as the general form.
    let plain: String = one(
        &c,
        "SELECT life_fit(earliest, latest IS NOT NULL) FROM expanded",
    );
    let general: String = one(
        &c,
        "SELECT life_fit_interval(earliest, latest) FROM expanded",
    );
    assert_eq!(plain, general);
}
