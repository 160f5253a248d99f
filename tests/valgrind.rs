//! The built library, loaded into the stock `sqlite3` shell, under
//! valgrind's memcheck: the demo and every line of the hostile-input table
//! run with no memory error (invalid reads or writes, use of uninitialised
//! values, bad frees). Leaks are checked only for the aggregates' states
//! (`--leak-check=full` on a script of its own): elsewhere the shell exits
//! without freeing what it holds, and that is not the extension's.
//!
//! valgrind is needed (Debian: `apt-get install valgrind`; `.ci/run`
//! installs it). Without it the test says SKIPPED, except under CI (the
//! `CI` environment variable set), where it fails.
//!
//! No suppression file is used: on Debian 12 (sqlite3 3.40.1, glibc 2.36,
//! valgrind 3.19) the shell and the library run clean.

mod common;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

/// Exit status valgrind is told to use when it found a memory error.
const MEMCHECK_ERROR: i32 = 99;

/// The built library (see `common::extension_library`).
fn library() -> PathBuf {
    common::extension_library().to_path_buf()
}

fn have(program: &str) -> bool {
    Command::new(program)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success())
}

/// True when the test can run; false (after saying so) where valgrind is
/// missing outside CI.
fn valgrind_available() -> bool {
    assert!(
        have("sqlite3"),
        "the sqlite3 shell is needed: install it (Debian: apt-get install sqlite3)"
    );
    if have("valgrind") {
        return true;
    }
    assert!(
        std::env::var_os("CI").is_none(),
        "valgrind is needed under CI: install it (Debian: apt-get install valgrind)"
    );
    eprintln!("SKIPPED: valgrind is not installed (.ci/run installs it)");
    false
}

/// Runs `script` in `sqlite3 :memory:` under memcheck, from the repository
/// root, with the extension loaded first.
fn under_memcheck(lib: &Path, script: &str) -> Output {
    under_memcheck_with(lib, script, "--leak-check=no")
}

/// [`under_memcheck`] with the given leak-check option.
fn under_memcheck_with(lib: &Path, script: &str, leaks: &str) -> Output {
    let mut child = Command::new("valgrind")
        .args([
            "--tool=memcheck",
            "--error-exitcode=99",
            leaks,
            "--track-origins=no",
            "--quiet",
            "sqlite3",
            ":memory:",
        ])
        .current_dir(ROOT)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start valgrind");
    let full = format!(".load {}\n{script}\n", lib.display());
    let mut stdin = child.stdin.take().unwrap();
    let writer = std::thread::spawn(move || stdin.write_all(full.as_bytes()));
    let out = child.wait_with_output().unwrap();
    writer.join().unwrap().unwrap();
    out
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// memcheck's own report lines start with `==pid==`.
fn memcheck_lines(stderr: &str) -> Vec<&str> {
    stderr.lines().filter(|l| l.starts_with("==")).collect()
}

/// The demo of `sql/demo.sql`, report included (written under the test's
/// temporary directory instead of `target/`).
#[test]
fn demo_runs_clean_under_memcheck() {
    if !valgrind_available() {
        return;
    }
    let lib = library();
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("valgrind");
    std::fs::create_dir_all(&dir).unwrap();
    let report = dir.join("demo-report.html");
    let script = std::fs::read_to_string(Path::new(ROOT).join("sql/demo.sql")).unwrap();
    assert!(script.contains(".load ./target/release/liblifedata\n"));
    assert!(script.contains(".output target/lifedata-demo-report.html\n"));
    let script = script
        .replace(".load ./target/release/liblifedata\n", "")
        .replace(
            ".output target/lifedata-demo-report.html\n",
            &format!(".output {}\n", report.display()),
        );
    let out = under_memcheck(&lib, &script);
    let (stdout, stderr) = (text(&out.stdout), text(&out.stderr));
    assert_ne!(
        out.status.code(),
        Some(MEMCHECK_ERROR),
        "memcheck found errors:\n{stderr}"
    );
    assert!(memcheck_lines(&stderr).is_empty(), "{stderr}");
    assert!(out.status.success(), "{stdout}\n{stderr}");
    // The whole demo ran: its last table and the report are there.
    assert!(stdout.contains("Planner's table"), "{stdout}");
    assert!(stdout.contains("licensed engineers"), "{stdout}");
    let html = std::fs::read_to_string(&report).unwrap();
    assert!(html.trim_end().ends_with("</html>"));
    assert_eq!(html.matches("<section>").count(), 5);
}

/// Every line of tests/cases/bad_input.tsv in one shell under memcheck (the
/// shell goes on after an error when reading a script from its input): each
/// is refused with its message, and memcheck reports nothing.
#[test]
fn hostile_input_runs_clean_under_memcheck() {
    if !valgrind_available() {
        return;
    }
    let lib = library();
    let model = r#"'{"dist":"weibull","shape":2,"scale":1000}'"#;
    let table = include_str!("cases/bad_input.tsv");
    let cases: Vec<(String, &str)> = table
        .lines()
        .filter(|l| !l.starts_with('#') && !l.is_empty())
        .map(|l| {
            let (sql, want) = l.split_once('\t').unwrap();
            (sql.replace("$M", model), want)
        })
        .collect();
    // A marker after each statement, so each error can be matched to its line.
    let mut script = String::new();
    for (i, (sql, _)) in cases.iter().enumerate() {
        script.push_str(&format!("{sql}\n.print 'case {i} done'\n"));
    }
    let out = under_memcheck(&lib, &script);
    let (stdout, stderr) = (text(&out.stdout), text(&out.stderr));
    assert_ne!(
        out.status.code(),
        Some(MEMCHECK_ERROR),
        "memcheck found errors:\n{stderr}"
    );
    assert!(memcheck_lines(&stderr).is_empty(), "{stderr}");
    // Every case ran to its marker, and every error names what it should.
    for (i, (sql, want)) in cases.iter().enumerate() {
        assert!(
            stdout.contains(&format!("case {i} done\n")),
            "{sql}: the shell stopped before it\n{stderr}"
        );
        assert!(stderr.contains(want), "{sql}: no '{want}' in\n{stderr}");
    }
    // The shell reports each failed statement on a line of its own.
    let errors = stderr
        .lines()
        .filter(|l| l.starts_with("Runtime error") || l.starts_with("Error"))
        .count();
    assert_eq!(
        errors,
        cases.len(),
        "one error per hostile line expected:\n{stderr}"
    );
    eprintln!("{} hostile inputs refused under memcheck", cases.len());
}

/// The aggregates keep their state in boxes that SQLite's xFinal must free,
/// also when a statement stops on an error half-way (grouped, whole-table
/// and as a sliding window, with one group per sample or many). Here leaks
/// count: nothing may be definitely lost.
#[test]
fn aggregate_states_are_freed_even_after_errors() {
    if !valgrind_available() {
        return;
    }
    let lib = library();
    let script = r#"
SELECT length(life_fit(column1, column2)) FROM (VALUES (1,1),(2,1),(3,0),(4,1));
SELECT life_fit(column1, column2) FROM (VALUES (1,1),(2,1),(3,2),(4,1));
SELECT life_fit(column1, column2, '{"shape":2}') OVER (ORDER BY column1 ROWS 1 PRECEDING) FROM (VALUES (1,1),(2,1),(3,2),(4,1));
SELECT length(life_fit(column1, column2, '{"shape":2}') OVER (ORDER BY column1 ROWS 1 PRECEDING)) FROM (VALUES (1,1),(2,1),(3,0),(4,1));
SELECT column3, length(life_fit(column1, column2)) FROM (VALUES (1,1,'a'),(2,1,'a'),(3,0,'b'),(4,1,'b'),(5,1,'b')) GROUP BY column3;
SELECT column3, life_fit(column1, column2) FROM (VALUES (1,1,'a'),(2,1,'a'),(3,0,'b'),(4,1,'b'),(5,7,'b')) GROUP BY column3;
SELECT length(life_compare(column3, column1, column2)) FROM (VALUES (1,1,'a'),(2,1,'a'),(3,0,'b'),(4,1,'b'),(5,1,'b'),(6,1,'a'));
SELECT length(life_fit_all(column1, column2)) FROM (VALUES (1,1),(2,1),(3,0),(4,1),(6,1));
SELECT life_km(column1, column2, 'no json') FROM (VALUES (1,1),(2,1));
"#;
    let out = under_memcheck_with(&lib, script, "--leak-check=full");
    let stderr = text(&out.stderr);
    assert_ne!(out.status.code(), Some(MEMCHECK_ERROR), "{stderr}");
    assert!(
        stderr.contains("life_fit: failed must be 1 (failure) or 0 (suspension), got 2")
            && stderr.contains("life_km: options"),
        "{stderr}"
    );
    let lost: Vec<&str> = memcheck_lines(&stderr)
        .into_iter()
        .filter(|l| l.contains("definitely lost") || l.contains("indirectly lost"))
        .collect();
    assert!(
        lost.iter().all(|l| l.contains(" 0 bytes in 0 blocks")),
        "{stderr}"
    );
}
