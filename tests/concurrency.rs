//! Several threads, each with its own connection to one file database,
//! call every lifedata function at the same time: no errors, and every
//! thread gets exactly (to the bit) what a single-threaded run gets.
//!
//! The functions keep per-thread state (the recently parsed models) and
//! per-statement state (SQLite's auxiliary data for constant models); this
//! checks that neither leaks between connections or threads, and that
//! results do not depend on what else runs.

use rusqlite::types::Value;
use rusqlite::Connection;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Barrier};

const THREADS: usize = 4;
const ROUNDS: usize = 2;

/// A small deterministic generator (xorshift64*), so the data are the same
/// on every run.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Builds the fleet database: 3 200 unit lives in four classes from three
/// suppliers (Weibull lives, about 60% still running or removed unfailed),
/// the same lives as grouped inspection records with entry ages and counts,
/// 400 units in service, and a fitted model per class.
fn build(path: &Path) {
    let _ = std::fs::remove_file(path);
    let c = Connection::open(path).unwrap();
    lifedata::register(&c).unwrap();
    c.execute_batch(
        "CREATE TABLE life(class TEXT, supplier TEXT, age REAL, failed INT,
                           fitted TEXT, ended TEXT);
         CREATE TABLE inspection(class TEXT, supplier TEXT, earliest REAL, latest REAL,
                                 entry REAL, units INT);
         CREATE TABLE running(class TEXT, age REAL, per_day REAL);",
    )
    .unwrap();
    let classes = [
        ("ALT", 2.8, 450_000.0),
        ("BRK", 1.6, 120_000.0),
        ("PMP", 1.1, 300_000.0),
        ("DOOR", 0.8, 80_000.0),
    ];
    let mut rng = Rng(0x5eed_1234_abcd_ef01);
    let tx = c.unchecked_transaction().unwrap();
    {
        let mut life = tx
            .prepare("INSERT INTO life VALUES (?1, ?2, ?3, ?4, date('2020-01-01', ?5), date('2020-01-01', ?6))")
            .unwrap();
        let mut insp = tx
            .prepare("INSERT INTO inspection VALUES (?1, ?2, ?3, ?4, ?5, ?6)")
            .unwrap();
        let mut run = tx
            .prepare("INSERT INTO running VALUES (?1, ?2, ?3)")
            .unwrap();
        for (class, shape, scale) in classes {
            for i in 0..800 {
                let supplier = ["A", "B", "C"][i % 3];
                let life_km: f64 = scale * (-(1.0 - rng.next()).ln()).powf(1.0 / shape);
                let seen_to: f64 = scale * 1.5 * rng.next();
                let (age, failed) = if life_km <= seen_to {
                    (life_km.round().max(1.0), 1)
                } else {
                    (seen_to.round(), 0)
                };
                let start = format!("+{} days", (rng.next() * 900.0) as i64);
                let end = format!("+{} days", 900 + (rng.next() * 900.0) as i64);
                life.execute(rusqlite::params![class, supplier, age, failed, start, end])
                    .unwrap();
                // Inspections every 50 000 km: the failure lies in an interval.
                let step = 50_000.0;
                let (earliest, latest) = if failed == 1 {
                    let k = (age / step).floor();
                    (Some(k * step), Some((k + 1.0) * step))
                } else {
                    (Some(age), None)
                };
                let entry = if i % 7 == 0 {
                    earliest.unwrap().min(20_000.0)
                } else {
                    0.0
                };
                insp.execute(rusqlite::params![
                    class,
                    supplier,
                    earliest,
                    latest,
                    entry,
                    1 + (i % 3) as i64
                ])
                .unwrap();
            }
            for _ in 0..100 {
                run.execute(rusqlite::params![
                    class,
                    (scale * rng.next()).round(),
                    150.0 + 200.0 * rng.next()
                ])
                .unwrap();
            }
        }
    }
    tx.commit().unwrap();
    c.execute_batch(
        r#"CREATE TABLE model AS
             SELECT class, life_fit(age, failed) AS m,
                    life_fit(age, failed, '{"keep_sample":true}') AS m_keep,
                    life_fit(age, failed, '{"shape":2}') AS m_known
               FROM life GROUP BY class;"#,
    )
    .unwrap();
}

/// One query per use of every function: aggregates (grouped and as window
/// functions), readers with constant and per-row models, bounds (Fisher,
/// likelihood ratio, chi-square), replacement economics, forecast, table
/// functions, pictures and usage.
fn queries() -> Vec<(&'static str, &'static str)> {
    vec![
        ("fit", "SELECT class, life_fit(age, failed) FROM life GROUP BY class"),
        ("fit lognormal", r#"SELECT class, life_fit(age, failed, '{"dist":"lognormal"}') FROM life GROUP BY class"#),
        ("fit weibull3", r#"SELECT class, life_fit(age, failed, '{"dist":"weibull3"}') FROM life WHERE class IN ('ALT', 'BRK') GROUP BY class"#),
        ("fit rank", r#"SELECT class, life_fit(age, failed, '{"method":"rank_y","ranks":"exact"}') FROM life GROUP BY class"#),
        ("fit_interval", r#"SELECT class, life_fit_interval(earliest, latest, entry, units, '{"dist":"gamma"}') FROM inspection WHERE class = 'PMP'"#),
        ("fit_interval weibull", "SELECT class, life_fit_interval(earliest, latest, entry, units) FROM inspection GROUP BY class"),
        ("fit_all", "SELECT class, life_fit_all(age, failed) FROM life WHERE class IN ('PMP', 'DOOR') GROUP BY class"),
        ("fit_all_interval", "SELECT life_fit_all_interval(earliest, latest, entry, units) FROM inspection WHERE class = 'BRK'"),
        ("km", "SELECT class, life_km(age, failed) FROM life GROUP BY class"),
        ("km_interval", r#"SELECT life_km_interval(coalesce(latest, earliest), latest, entry, units, '{"band":"linear"}') FROM inspection WHERE class = 'ALT'"#),
        ("compare", "SELECT class, life_compare(supplier, age, failed) FROM life GROUP BY class"),
        ("compare_interval", "SELECT life_compare_interval(supplier, earliest, latest, entry, units) FROM inspection WHERE class = 'PMP'"),
        ("fit window", "SELECT rowid, json_extract(life_fit(age, failed) OVER (ORDER BY rowid ROWS BETWEEN 60 PRECEDING AND 60 FOLLOWING), '$.scale') FROM life WHERE class = 'BRK'"),
        ("forecast", "SELECT r.class, life_forecast(m.m, r.age, 90 * r.per_day) FROM running AS r JOIN model AS m USING (class) GROUP BY r.class"),
        ("forecast renewal", r#"SELECT r.class, life_forecast(m.m, r.age, 1000 * r.per_day, '{"renewal":true,"quantiles":[0.9,0.99]}') FROM running AS r JOIN model AS m USING (class) WHERE r.rowid % 100 = 0 GROUP BY r.class"#),
        ("forecast window", "SELECT r.rowid, json_extract(life_forecast(m.m, r.age, 30 * r.per_day) OVER (ORDER BY r.rowid ROWS BETWEEN 10 PRECEDING AND CURRENT ROW), '$.expected') FROM running AS r JOIN model AS m USING (class)"),
        ("readers", "SELECT class, life_quantile(m, 0.1), life_cdf(m, 1e5), life_reliability(m, 1e5), life_pdf(m, 1e5), life_hazard(m, 1e5), life_mean(m), life_cond_fail(m, 1e5, 3e4) FROM model"),
        ("readers per row", "SELECT r.class, sum(life_cond_fail(m.m, r.age, 30 * r.per_day)), sum(life_reliability(m.m, r.age)), sum(life_hazard(m.m, r.age)) FROM running AS r JOIN model AS m USING (class) GROUP BY r.class"),
        ("readers constant", r#"SELECT sum(life_quantile('{"dist":"loglogistic","shape":2.5,"scale":1000}', age / 2e6)) FROM running"#),
        ("replacement", "SELECT class, life_replace_age(m, 1, 10), life_replacement(m, 1, 10, 6e5), life_availability_age(m, 1, 8) FROM model"),
        ("renewal", "SELECT class, life_renewal(m, 4e5), life_block_replacement(m, 1, 10, 1e6) FROM model WHERE class = 'ALT'"),
        ("fisher bounds", "SELECT class, life_param_lower(m, 'shape'), life_param_upper(m, 'scale', 0.9, 1), life_quantile_lower(m, 0.1), life_quantile_upper(m, 0.1), life_reliability_lower(m, 5e4), life_reliability_upper(m, 5e4, 0.9) FROM model"),
        ("lr bounds", "SELECT class, life_quantile_lower(m_keep, 0.1, 0.95, 2, 'lr'), life_quantile_upper(m_keep, 0.1, 0.95, 2, 'lr'), life_reliability_lower(m_keep, 5e4, 0.9, 1, 'lr'), life_param_upper(m_keep, 'shape', 0.95, 2, 'lr') FROM model"),
        ("chi2 bounds", "SELECT class, life_param_lower(m_known, 'scale', 0.9, 1), life_quantile_lower(m_known, 0.1, 0.9, 1, 'chi2'), life_reliability_upper(m_known, 5e4, 0.9, 2, 'chi2') FROM model"),
        ("curve", "SELECT model.class, c.* FROM model, life_curve(model.m, 1000, 600000, 40, 'log', 0.9) AS c"),
        ("plot points", "SELECT model.class, p.* FROM model, life_plot_points(model.m_keep, 0.9, 'exact') AS p"),
        ("cost curve", "SELECT model.class, c.* FROM model, life_cost_curve(model.m, 1, 10, 800000, 25) AS c"),
        ("svg", "SELECT class, life_plot_svg(m_keep, class, 'km', 0.9), life_cost_svg(m, 1, 10, class, 'km') FROM model"),
        ("usage", "SELECT class, sum(life_usage(fitted, ended, 'days')), sum(life_usage(fitted, ended)) FROM life GROUP BY class"),
    ]
}

/// Every row of a query, values rendered exactly (doubles by their bits).
fn run(c: &Connection, sql: &str) -> String {
    let mut stmt = c.prepare(sql).unwrap_or_else(|e| panic!("{sql}: {e}"));
    let n = stmt.column_count();
    let mut rows = stmt.query([]).unwrap();
    let mut out = String::new();
    let mut count = 0;
    while let Some(row) = rows.next().unwrap_or_else(|e| panic!("{sql}: {e}")) {
        for i in 0..n {
            match row.get::<_, Value>(i).unwrap() {
                Value::Null => out.push_str("NULL"),
                Value::Integer(v) => out.push_str(&v.to_string()),
                Value::Real(v) => out.push_str(&format!("{:016x}", v.to_bits())),
                Value::Text(t) => out.push_str(&t),
                Value::Blob(b) => out.push_str(&format!("{b:?}")),
            }
            out.push('|');
        }
        out.push('\n');
        count += 1;
    }
    assert!(count > 0, "{sql}: no rows");
    out
}

fn connect(path: &Path) -> Connection {
    let c = Connection::open(path).unwrap();
    lifedata::register(&c).unwrap();
    c
}

/// Runs every query `rounds` times, starting at `offset` in the list so
/// that the threads are in different functions at any moment.
fn run_all(path: &Path, offset: usize, rounds: usize) -> BTreeMap<&'static str, String> {
    let c = connect(path);
    let qs = queries();
    let mut out = BTreeMap::new();
    for round in 0..rounds {
        for k in 0..qs.len() {
            let (name, sql) = qs[(k + offset + round * 5) % qs.len()];
            let got = run(&c, sql);
            if let Some(prev) = out.insert(name, got.clone()) {
                assert_eq!(prev, got, "{name}: differs between rounds on one thread");
            }
        }
    }
    out
}

#[test]
fn threads_with_own_connections_agree_with_one_thread() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("concurrency");
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("fleet.db");
    build(&path);
    let alone = run_all(&path, 0, 1);
    assert_eq!(alone.len(), queries().len());
    let barrier = Arc::new(Barrier::new(THREADS));
    let handles: Vec<_> = (0..THREADS)
        .map(|t| {
            let path = path.clone();
            let barrier = Arc::clone(&barrier);
            std::thread::spawn(move || {
                barrier.wait();
                run_all(&path, t * 7, ROUNDS)
            })
        })
        .collect();
    for (t, h) in handles.into_iter().enumerate() {
        let got = h.join().unwrap_or_else(|_| panic!("thread {t} failed"));
        for (name, want) in &alone {
            assert_eq!(
                &got[name], want,
                "thread {t}: {name} differs from the single-thread run"
            );
        }
    }
    // Every registered function and table is among the queries.
    let c = connect(&path);
    let mut names: Vec<String> = c
        .prepare(
            "SELECT name FROM pragma_function_list WHERE name LIKE 'life%'
             UNION SELECT name FROM pragma_module_list WHERE name LIKE 'life%'",
        )
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    names.sort();
    names.dedup();
    assert!(names.len() >= 30, "{names:?}");
    let all_sql: String = queries().iter().map(|(_, q)| *q).collect();
    for name in &names {
        assert!(
            all_sql.contains(&format!("{name}(")),
            "{name} is not called by any query"
        );
    }
    // The models did fit and the results are numbers, not NULLs or empties.
    let fitted: i64 = c
        .query_row(
            "SELECT count(*) FROM model WHERE json_extract(m, '$.shape') > 0
                AND json_extract(m_keep, '$.sample') IS NOT NULL
                AND json_extract(m_known, '$.known_shape.failures') > 0",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(fitted, 4);
}
