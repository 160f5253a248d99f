//! Speed of the extension against SQLite's own built-ins on the same rows.
//!
//! Run: `cargo build --release -p lifedata-ext && cargo run --release --example bench`
//! (`-- --quick` for a smaller, faster pass). The product is measured as
//! users run it: the loadable extension in the stock `sqlite3` shell, on a
//! file database. Each comparison runs both queries alternately in ONE shell
//! process, several times, and reports the median "Run Time: real" of each
//! and the median of the per-run ratios. Nothing here is a test: ratios are
//! printed, not asserted.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

/// A weibull-like day-resolution age from an integer index: ages are whole
/// days, so a large table has many ties, as fleet data do.
const AGE: &str = "CAST(1000.0 * pow(-ln(((i * 2654435761) % 4294967296 + 0.5) / 4294967296.0), 1.0 / 2.2) AS INTEGER) + 1";
const FAILED: &str = "(((i * 40503) % 65536) < 26000)";

fn shell(db: &Path, script: &str) -> String {
    let lib = Path::new(ROOT).join("target/release/liblifedata");
    let mut child = Command::new("sqlite3")
        .arg(db)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the sqlite3 shell");
    use std::io::Write;
    child
        .stdin
        .take()
        .unwrap()
        .write_all(format!(".load {}\n{script}\n", lib.display()).as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success() && err.is_empty(), "{err}");
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Runs `ours` and `theirs` alternately `runs` times in one shell process;
/// returns the median real time of each and the median of the per-run
/// ratios. Each ratio compares two back-to-back runs, so a slow spell of a
/// shared machine (seen here: the same query varying by 1.6x within a
/// minute) moves both sides of it alike.
fn pair(db: &Path, ours: &str, theirs: &str, runs: usize) -> (f64, f64, f64) {
    let mut script = String::from(".timer on\n");
    for _ in 0..runs {
        script.push_str(&format!("{ours};\n{theirs};\n"));
    }
    let out = shell(db, &script);
    let times: Vec<f64> = out
        .lines()
        .filter_map(|l| l.strip_prefix("Run Time: real "))
        .map(|l| l.split_whitespace().next().unwrap().parse().unwrap())
        .collect();
    assert_eq!(times.len(), 2 * runs, "{out}");
    let a: Vec<f64> = times.iter().step_by(2).copied().collect();
    let b: Vec<f64> = times.iter().skip(1).step_by(2).copied().collect();
    let ratios = a.iter().zip(&b).map(|(x, y)| x / y).collect();
    (median(a), median(b), median(ratios))
}

fn peak_kib(db: &Path, query: &str) -> f64 {
    let out = shell(
        db,
        &format!("{query};\n.shell grep VmHWM /proc/$PPID/status\n"),
    );
    out.lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|l| l.split_whitespace().next())
        .and_then(|v| v.parse().ok())
        .expect("VmHWM")
}

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let scale = if quick { 10 } else { 1 };
    let (grouped_rows, big_rows, reader_rows, runs) = (
        1_000_000 / scale,
        10_000_000 / scale,
        1_000_000 / scale,
        if quick { 3 } else { 7 },
    );
    let dir = PathBuf::from(ROOT).join("target/bench");
    std::fs::create_dir_all(&dir).unwrap();
    let db = dir.join(if quick { "bench-quick.db" } else { "bench.db" });
    if !db.exists() {
        eprintln!("building {} ...", db.display());
        shell(
            &db,
            &format!(
                "PRAGMA journal_mode=OFF; PRAGMA synchronous=OFF;
                 CREATE TABLE lives(grp INT, age REAL, failed INT);
                 WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < {grouped_rows})
                 INSERT INTO lives SELECT i % 1000, {AGE}, {FAILED} FROM k;
                 CREATE TABLE big(age REAL, failed INT);
                 WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < {big_rows})
                 INSERT INTO big SELECT {AGE}, {FAILED} FROM k;
                 CREATE TABLE units(class INT, age REAL, p REAL);
                 WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < {reader_rows})
                 INSERT INTO units SELECT i % 5, {AGE}, ((i * 7) % 997 + 0.5) / 1000.0 FROM k;
                 CREATE TABLE class_model(class INT PRIMARY KEY, model TEXT, shape REAL, scale REAL);
                 INSERT INTO class_model SELECT c, printf('{{\"dist\":\"weibull\",\"shape\":%.17g,\"scale\":%.17g}}', 2.0 + c / 10.0, 900.0 + 20 * c), 2.0 + c / 10.0, 900.0 + 20 * c
                   FROM (SELECT 0 c UNION ALL SELECT 1 UNION ALL SELECT 2 UNION ALL SELECT 3 UNION ALL SELECT 4);
                 CREATE TABLE running(age REAL, km_per_day REAL);
                 WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i+1 FROM k WHERE i < 100000)
                 INSERT INTO running SELECT {AGE}, 1 + i % 3 FROM k;"
            ),
        );
    }
    let m = r#"'{"dist":"weibull","shape":2.2,"scale":1000}'"#;
    println!("lifedata benchmark ({runs} alternating runs per pair in one sqlite3 shell process; median times, median of the per-run ratios; file database {})", db.display());
    println!(
        "{:<58} {:>9} {:>9} {:>7} {:>7}",
        "comparison", "lifedata", "SQLite", "ratio", "target"
    );
    let report = |name: &str, (a, b, ratio): (f64, f64, f64), target: &str| {
        println!("{name:<58} {a:>8.3}s {b:>8.3}s {ratio:>6.2}x {target:>7}");
    };
    report(
        &format!("life_fit per group, {grouped_rows} lives in 1000 groups vs avg"),
        pair(
            &db,
            "SELECT count(*), sum(length(m)) FROM (SELECT grp, life_fit(age, failed) AS m FROM lives GROUP BY grp)",
            "SELECT count(*), sum(a) FROM (SELECT grp, avg(age) AS a FROM lives GROUP BY grp)",
            runs,
        ),
        "1.5x",
    );
    report(
        &format!("life_fit over one group of {big_rows} lives vs avg"),
        pair(
            &db,
            "SELECT length(life_fit(age, failed)) FROM big",
            "SELECT avg(age) FROM big",
            runs,
        ),
        "2x",
    );
    let plain_cond = "1 - exp(-(pow((age + 30) / 1000.0, 2.2) - pow(age / 1000.0, 2.2)))";
    report(
        &format!("life_cond_fail, constant model, {reader_rows} rows vs SQL"),
        pair(
            &db,
            &format!("SELECT sum(life_cond_fail({m}, age, 30)) FROM units"),
            &format!("SELECT sum({plain_cond}) FROM units"),
            runs,
        ),
        "1.3x",
    );
    report(
        &format!("life_quantile, constant model, {reader_rows} rows vs SQL"),
        pair(
            &db,
            &format!("SELECT sum(life_quantile({m}, p)) FROM units"),
            "SELECT sum(1000.0 * pow(-ln(1 - p), 1 / 2.2)) FROM units",
            runs,
        ),
        "1.3x",
    );
    report(
        &format!("life_reliability, constant model, {reader_rows} rows vs SQL"),
        pair(
            &db,
            &format!("SELECT sum(life_reliability({m}, age)) FROM units"),
            "SELECT sum(exp(-pow(age / 1000.0, 2.2))) FROM units",
            runs,
        ),
        "1.3x",
    );
    report(
        &format!("life_cond_fail, model joined per class, {reader_rows} rows vs SQL"),
        pair(
            &db,
            "SELECT sum(life_cond_fail(c.model, u.age, 30)) FROM units AS u JOIN class_model AS c USING (class)",
            "SELECT sum(1 - exp(-(pow((u.age + 30) / c.scale, c.shape) - pow(u.age / c.scale, c.shape)))) FROM units AS u JOIN class_model AS c USING (class)",
            runs,
        ),
        "1.3x",
    );
    report(
        &format!("life_reliability, one-row MATERIALIZED model, {reader_rows} rows vs SQL"),
        pair(
            &db,
            "WITH m AS MATERIALIZED (SELECT model FROM class_model WHERE class = 2) SELECT sum(life_reliability(m.model, u.age)) FROM units AS u, m",
            "WITH m AS MATERIALIZED (SELECT shape, scale FROM class_model WHERE class = 2) SELECT sum(exp(-pow(u.age / m.scale, m.shape))) FROM units AS u, m",
            runs,
        ),
        "1.3x",
    );
    // Cost per call.
    let per_call = |name: &str, query: &str, calls: f64| {
        let (a, _, _) = pair(&db, query, "SELECT 1", runs);
        println!("{name:<58} {:>8.3} ms per call", 1000.0 * a / calls);
    };
    per_call(
        "life_forecast over 100 000 running units (30-unit horizon)",
        &format!("SELECT length(life_forecast({m}, age, 30 * km_per_day)) FROM running"),
        1.0,
    );
    shell(
        &db,
        "CREATE TABLE IF NOT EXISTS small_model AS SELECT life_fit(age, failed, '{\"keep_sample\":true}') AS m FROM lives WHERE grp = 7;",
    );
    per_call(
        "Fisher bounds on B10 (lower and upper), 1000 lives",
        "WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < 1000)
         SELECT sum(life_quantile_lower(m, 0.1 + i * 1e-9) + life_quantile_upper(m, 0.1 + i * 1e-9))
           FROM small_model, k",
        1000.0,
    );
    per_call(
        "likelihood-ratio bounds on B10 (lower and upper), 1000 lives",
        "SELECT life_quantile_lower(m, 0.1, 0.95, 2, 'lr'), life_quantile_upper(m, 0.1, 0.95, 2, 'lr') FROM small_model",
        1.0,
    );
    per_call(
        "family ranking (7 families), 1000 lives",
        "SELECT length(life_fit_all(age, failed)) FROM lives WHERE grp = 7",
        1.0,
    );
    per_call(
        "SVG probability plot, 1000 lives",
        "WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < 20)
         SELECT sum(length(life_plot_svg(m, 'plot ' || i))) FROM small_model, k",
        20.0,
    );
    let base = peak_kib(&db, "SELECT avg(age) FROM big");
    let fit = peak_kib(&db, "SELECT length(life_fit(age, failed)) FROM big");
    println!(
        "{:<58} {:>8.3} bytes per row (peak {:.0} MiB over the avg query's {:.0} MiB)",
        format!("peak memory of life_fit over {big_rows} day-resolution lives"),
        (fit - base) * 1024.0 / big_rows as f64,
        fit / 1024.0,
        base / 1024.0
    );
}
