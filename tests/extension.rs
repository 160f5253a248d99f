//! The product as users get it: the real loadable library, built from this
//! tree, loaded into the stock `sqlite3` shell and into Python's `sqlite3`.
//!
//! The library is built with its own target directory, never in the same
//! build as the bundled SQLite these tests link (rusqlite's `bundled` and
//! `loadable_extension` features must not meet).

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::sync::OnceLock;

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

/// The built library's path without the `.so`, as a user would type it
/// after `.load` (see `common::extension_library`).
fn library() -> &'static str {
    common::extension_library().to_str().expect("a UTF-8 path")
}

fn sqlite3_shell() -> &'static str {
    static SHELL: OnceLock<String> = OnceLock::new();
    SHELL.get_or_init(|| {
        let ok = Command::new("sqlite3")
            .arg("--version")
            .output()
            .map(|o| o.status.success())
            .unwrap_or(false);
        assert!(
            ok,
            "the sqlite3 shell is needed for these tests: install it (Debian: apt-get install sqlite3)"
        );
        "sqlite3".to_string()
    })
}

/// Runs `script` in the sqlite3 shell with the extension loaded.
fn shell(db: &str, script: &str) -> Output {
    let mut child = Command::new(sqlite3_shell())
        .arg(db)
        .current_dir(ROOT)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let full = format!(".load {}\n{script}\n", library());
    use std::io::Write;
    child
        .stdin
        .take()
        .unwrap()
        .write_all(full.as_bytes())
        .unwrap();
    child.wait_with_output().unwrap()
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

#[test]
fn loads_by_file_name_and_fits_in_the_shell() {
    let out = shell(
        ":memory:",
        "SELECT sqlite_version();
         WITH lz(t) AS (VALUES (17.88),(28.92),(33.00),(41.52),(42.12),(45.60),(48.48),(51.84),
           (51.96),(54.12),(55.56),(67.80),(68.64),(68.64),(68.88),(84.12),(93.12),(98.64),
           (105.12),(105.84),(127.92),(128.04),(173.40))
         SELECT printf('%.6f %.4f', json_extract(m, '$.shape'), json_extract(m, '$.scale'))
         FROM (SELECT life_fit(t, 1) AS m FROM lz);",
    );
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{}{}", stdout, text(&out.stderr));
    let lines: Vec<&str> = stdout.lines().collect();
    eprintln!("sqlite3 shell {}", lines[0]);
    // Lieblein & Zelen (1956) bearings; scipy 1.17.1 reference in fixtures.
    assert_eq!(lines[1], "2.102059 81.8783");
}

/// tests/cases/bad_input.tsv, each line in its own shell process against a
/// file database: an SQL error naming function and value, exit status 1
/// (never a signal), and the database file unchanged.
#[test]
fn bad_input_in_the_stock_shell() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("bad-input");
    std::fs::create_dir_all(&dir).unwrap();
    let db = dir.join("fleet.db");
    let _ = std::fs::remove_file(&db);
    let setup = shell(
        db.to_str().unwrap(),
        "CREATE TABLE life(age REAL, failed INT); INSERT INTO life VALUES (10,1),(20,0),(30,1);",
    );
    assert!(setup.status.success(), "{}", text(&setup.stderr));
    let before = std::fs::read(&db).unwrap();
    let model = r#"'{"dist":"weibull","shape":2,"scale":1000}'"#;
    let table = include_str!("cases/bad_input.tsv");
    let mut count = 0;
    for line in table
        .lines()
        .filter(|l| !l.starts_with('#') && !l.is_empty())
    {
        let (sql, want) = line.split_once('\t').unwrap();
        let sql = sql.replace("$M", model);
        let out = shell(db.to_str().unwrap(), &sql);
        let stderr = text(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{sql}: {stderr}");
        assert!(
            stderr.contains(want),
            "{sql}\n  got:  {stderr}\n  want: {want}"
        );
        count += 1;
    }
    assert_eq!(std::fs::read(&db).unwrap(), before, "the database changed");
    eprintln!("{count} bad inputs refused in the sqlite3 shell");
}

/// Every ```sql example in README.md that is followed by a ```text block
/// is run in the shell, and its output must be exactly that block.
#[test]
fn readme_examples_print_what_the_readme_says() {
    let readme = std::fs::read_to_string(Path::new(ROOT).join("README.md")).unwrap();
    let mut examples = 0;
    let mut covered = String::new();
    let mut rest = readme.as_str();
    while let Some(start) = rest.find("```sql\n") {
        let after = &rest[start + 7..];
        let end = after.find("```").unwrap();
        let sql = &after[..end];
        rest = &after[end + 3..];
        let Some(out_block) = rest.strip_prefix("\n```text\n") else {
            continue;
        };
        let out_end = out_block.find("```").unwrap();
        let want = &out_block[..out_end];
        rest = &out_block[out_end + 3..];
        let out = shell(":memory:", sql);
        assert!(out.status.success(), "{sql}\n{}", text(&out.stderr));
        assert_eq!(text(&out.stdout), want, "README example:\n{sql}");
        covered.push_str(sql);
        examples += 1;
    }
    // Every function has at least one checked example.
    for f in [
        "life_fit(",
        "life_quantile(",
        "life_cdf(",
        "life_reliability(",
        "life_pdf(",
        "life_hazard(",
        "life_mean(",
        "life_cond_fail(",
        "life_replace_age(",
        "life_usage(",
    ] {
        assert!(covered.contains(f), "no checked README example uses {f}");
    }
    eprintln!("{examples} README examples checked");
}

/// The demo command's SQL runs in the shell and prints every class.
#[test]
fn demo_runs_in_the_shell() {
    // The demo loads ./target/release/liblifedata; point it at this build.
    let script = std::fs::read_to_string(Path::new(ROOT).join("sql/demo.sql")).unwrap();
    let script = script.replace(".load ./target/release/liblifedata", "");
    let out = shell("", &script);
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{stdout}{}", text(&out.stderr));
    for class in [
        "air compressor",
        "alternator",
        "coolant pump",
        "door actuator",
        "starter motor",
    ] {
        assert!(stdout.contains(class), "{class} missing from\n{stdout}");
    }
    assert!(stdout.contains("INVENTED"));
    assert!(stdout.contains("licensed engineers"));
    assert!(stdout.contains("Planner's table"));
    assert!(stdout.contains("spares 90 d (95%)"));
    // The report: one HTML page written by SQL, with the pictures embedded.
    let report = Path::new(ROOT).join("target/lifedata-demo-report.html");
    let html = std::fs::read_to_string(&report).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>") && html.trim_end().ends_with("</html>"));
    assert_eq!(html.matches("<section>").count(), 5);
    assert!(html.matches("<svg").count() >= 8, "pictures missing");
    assert!(html.contains("licensed engineers"));
    open_in_chromium(&report);
}

/// Opens the report in headless Chromium (Debian's `chromium`, which
/// `.ci/run` installs): no console errors, and a screenshot with the plots
/// drawn (a near-blank page compresses to a few kilobytes).
fn open_in_chromium(report: &Path) {
    let Some(browser) = ["chromium", "chromium-browser"].into_iter().find(|b| {
        Command::new(b)
            .arg("--version")
            .output()
            .is_ok_and(|o| o.status.success())
    }) else {
        eprintln!("SKIPPED: no chromium to open the report (.ci/run installs it)");
        return;
    };
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR"));
    let shot = dir.join("demo-report.png");
    let _ = std::fs::remove_file(&shot);
    let out = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--enable-logging=stderr",
            "--v=0",
            "--window-size=1100,3200",
        ])
        .arg(format!(
            "--user-data-dir={}",
            dir.join("chromium-profile").display()
        ))
        .arg(format!("--screenshot={}", shot.display()))
        .arg(format!("file://{}", report.display()))
        .output()
        .unwrap();
    let log = text(&out.stderr);
    let console: Vec<&str> = log
        .lines()
        .filter(|l| l.contains("CONSOLE") || l.contains("Uncaught"))
        .collect();
    assert!(console.is_empty(), "console messages: {console:?}");
    let size = std::fs::metadata(&shot).map(|m| m.len()).unwrap_or(0);
    assert!(
        size > 100_000,
        "screenshot {} is {size} bytes",
        shot.display()
    );
    eprintln!("report screenshot: {} ({size} bytes)", shot.display());
}

fn python_with_extensions() -> Option<PathBuf> {
    // Debian's own python3 has enable_load_extension; a pyenv build may not.
    for candidate in ["/usr/bin/python3", "python3"] {
        let ok = Command::new(candidate)
            .args([
                "-c",
                "import sqlite3; sqlite3.connect(':memory:').enable_load_extension(True)",
            ])
            .output()
            .map(|o| o.status.success())
            .unwrap_or(false);
        if ok {
            return Some(PathBuf::from(candidate));
        }
    }
    None
}

#[test]
fn loads_into_python_sqlite3() {
    let Some(python) = python_with_extensions() else {
        eprintln!("SKIPPED: no python3 whose sqlite3 module can load extensions");
        return;
    };
    let program = r#"
import sqlite3, sys
con = sqlite3.connect(":memory:")
con.enable_load_extension(True)
con.load_extension(sys.argv[1])
con.enable_load_extension(False)
con.execute("CREATE TABLE life(age REAL, failed INT)")
con.executemany("INSERT INTO life VALUES (?, ?)",
                [(17.88,1),(28.92,1),(33.0,1),(41.52,1),(42.12,1),(45.6,1),(48.48,1),(51.84,1),
                 (51.96,1),(54.12,1),(55.56,1),(67.8,1),(68.64,1),(68.64,1),(68.88,1),(84.12,1),
                 (93.12,1),(98.64,1),(105.12,1),(105.84,1),(127.92,1),(128.04,1),(173.4,1)])
m, = con.execute("SELECT life_fit(age, failed) FROM life").fetchone()
b10, = con.execute("SELECT life_quantile(?, 0.1)", (m,)).fetchone()
print(sqlite3.sqlite_version, "%.4f" % b10)
try:
    con.execute("SELECT life_quantile(?, 2)", (m,)).fetchone()
except sqlite3.OperationalError as e:
    print(e)
"#;
    let out = Command::new(&python)
        .args(["-c", program, library()])
        .output()
        .unwrap();
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{stdout}{}", text(&out.stderr));
    let lines: Vec<&str> = stdout.lines().collect();
    eprintln!("python sqlite3 {}", lines[0]);
    // B10 of the Lieblein & Zelen fit: scale * (-ln 0.9)^(1/shape) with the
    // scipy reference estimates (2.1020589, 81.878334) gives 28.7 (to 4 d.p. below).
    let b10: f64 = lines[0].split(' ').nth(1).unwrap().parse().unwrap();
    let want = 81.878_334 * (-(0.9f64).ln()).powf(1.0 / 2.102_058_9);
    assert!((b10 - want).abs() < 1e-3, "{b10} vs {want}");
    assert_eq!(lines[1], "life_quantile: p must be in [0, 1), got 2");
}

/// The loader's guard against hosts older than the minimum SQLite version,
/// checked by the extension package's own unit tests (a fake API table).
#[test]
fn old_host_guard_unit_tests_pass() {
    let target = Path::new(env!("CARGO_TARGET_TMPDIR")).join("extension-build");
    let status = Command::new(env!("CARGO"))
        .args(["test", "--release", "-p", "lifedata-ext", "--target-dir"])
        .arg(&target)
        .current_dir(ROOT)
        .status()
        .unwrap();
    assert!(status.success());
}

/// A real SQLite loader reporting an old version: the SQLite source that
/// rusqlite bundles, with its version number set to 3.33.0, compiled into a
/// small host program that loads the library as any application would. The
/// guard must refuse with a message and leave the connection usable.
/// (No SQLite older than 3.34.1 is available offline; the guard reads only
/// the version from the API table before touching anything else, so the
/// newer table behind the old number does not change what is tested.)
#[test]
fn a_real_loader_reporting_sqlite_3_33_gets_a_clear_refusal() {
    let home = std::env::var_os("CARGO_HOME")
        .map(PathBuf::from)
        .or_else(|| std::env::var_os("HOME").map(|h| Path::new(&h).join(".cargo")))
        .expect("CARGO_HOME or HOME");
    let registry = home.join("registry").join("src");
    let source = std::fs::read_dir(&registry)
        .expect("the cargo registry")
        .flatten()
        .flat_map(|index| {
            std::fs::read_dir(index.path())
                .into_iter()
                .flatten()
                .flatten()
        })
        .map(|krate| krate.path().join("sqlite3").join("sqlite3.c"))
        .find(|p| {
            p.exists()
                && p.parent()
                    .and_then(|d| d.parent())
                    .and_then(|d| d.file_name())
                    .is_some_and(|n| n.to_string_lossy().starts_with("libsqlite3-sys-"))
        })
        .expect("libsqlite3-sys' bundled sqlite3.c in the cargo registry");
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("old-host");
    std::fs::create_dir_all(&dir).unwrap();
    let original = std::fs::read_to_string(&source).unwrap();
    let mut patched = String::with_capacity(original.len());
    let mut changed = 0;
    for line in original.split_inclusive('\n') {
        if line.starts_with("#define SQLITE_VERSION_NUMBER ") {
            patched.push_str("#define SQLITE_VERSION_NUMBER 3033000\n");
            changed += 1;
        } else if line.starts_with("#define SQLITE_VERSION ") {
            patched.push_str("#define SQLITE_VERSION \"3.33.0\"\n");
            changed += 1;
        } else {
            patched.push_str(line);
        }
    }
    assert_eq!(changed, 2, "version lines in {}", source.display());
    std::fs::write(dir.join("sqlite3.c"), patched).unwrap();
    std::fs::copy(source.with_file_name("sqlite3.h"), dir.join("sqlite3.h")).unwrap();
    std::fs::write(
        dir.join("host.c"),
        r#"#include <stdio.h>
#include "sqlite3.h"
int main(int argc, char **argv) {
    sqlite3 *db;
    char *err = 0;
    sqlite3_stmt *st;
    if (sqlite3_open(":memory:", &db) != SQLITE_OK) return 2;
    sqlite3_enable_load_extension(db, 1);
    int rc = sqlite3_load_extension(db, argv[1], 0, &err);
    printf("version %s\nrc %d\nmessage %s\n", sqlite3_libversion(), rc, err ? err : "(none)");
    sqlite3_free(err);
    if (sqlite3_prepare_v2(db, "SELECT 6 * 7", -1, &st, 0) != SQLITE_OK) return 3;
    if (sqlite3_step(st) != SQLITE_ROW) return 4;
    printf("after %d\n", sqlite3_column_int(st, 0));
    sqlite3_finalize(st);
    sqlite3_close(db);
    return 0;
}
"#,
    )
    .unwrap();
    let host = dir.join("host");
    let built = Command::new("cc")
        .current_dir(&dir)
        .args(["-O0", "-o"])
        .arg(&host)
        .args(["host.c", "sqlite3.c", "-lpthread", "-ldl", "-lm"])
        .output()
        .expect("a C compiler (cc) for the old-host test");
    assert!(built.status.success(), "{}", text(&built.stderr));
    let out = Command::new(&host)
        .arg(format!("{}.so", library()))
        .output()
        .unwrap();
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{stdout}{}", text(&out.stderr));
    assert!(stdout.contains("version 3.33.0\n"), "{stdout}");
    assert!(stdout.contains("rc 1\n"), "{stdout}");
    assert!(
        stdout.contains("lifedata needs SQLite 3.34.1 or newer; this host runs 3.33.0\n"),
        "{stdout}"
    );
    assert!(stdout.contains("after 42\n"), "{stdout}");
}
