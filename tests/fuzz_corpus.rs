//! The committed fuzz corpora replayed through the fuzz targets' own checks
//! on every `cargo test` (the fuzzer itself needs a nightly compiler and
//! runs outside CI; see tests/fuzz/README.md). Each input must give a value
//! or an SQL error named after its function, never a panic; fits must not
//! depend on row order and must read back.

#[allow(dead_code)]
#[path = "fuzz/src/lib.rs"]
mod fuzz;

use std::path::Path;

/// Runs every file of `tests/fuzz/corpus/<target>` through `case`.
fn replay(target: &str, case: fn(&[u8])) {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fuzz/corpus")
        .join(target);
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .flatten()
        .map(|e| e.path())
        .collect();
    files.sort();
    assert!(files.len() >= 50, "{target}: only {} seeds", files.len());
    let started = std::time::Instant::now();
    for f in &files {
        let data = std::fs::read(f).unwrap();
        let outcome = std::panic::catch_unwind(|| case(&data));
        assert!(outcome.is_ok(), "{target}: {} fails its check", f.display());
    }
    eprintln!(
        "{target}: {} inputs in {:.1} s",
        files.len(),
        started.elapsed().as_secs_f64()
    );
}

#[test]
fn model_parse_corpus() {
    replay("model_parse", fuzz::cases::model_parse::run_case);
}

#[test]
fn sql_readers_corpus() {
    replay("sql_readers", fuzz::cases::sql_readers::run_case);
}

#[test]
fn fit_corpus() {
    replay("fit", fuzz::cases::fit::run_case);
}

#[test]
fn sql_aggregates_corpus() {
    replay("sql_aggregates", fuzz::cases::sql_aggregates::run_case);
}
