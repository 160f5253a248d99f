//! Helpers shared by the tests: reading committed fixtures, building the
//! loadable library.
#![allow(dead_code)] // each test file uses its own subset

use lifedata::sample::Sample;
use serde_json::Value;

/// Reads a JSON fixture relative to the repository root.
pub fn load(path: &str) -> Value {
    let text = std::fs::read_to_string(format!("{}/{path}", env!("CARGO_MANIFEST_DIR")))
        .unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap()
}

/// A JSON number.
pub fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// Relative difference of `a` from the reference `b`.
pub fn rel(a: f64, b: f64) -> f64 {
    if a == b {
        0.0
    } else {
        (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
    }
}

/// Rows [earliest, latest or null, entry, count] into a sample.
pub fn sample_of(rows: &Value) -> Sample {
    let mut s = Sample::new();
    for r in rows.as_array().unwrap() {
        let latest = if r[1].is_null() { None } else { Some(f(&r[1])) };
        s.push(Sample::observation(f(&r[0]), latest, f(&r[2]), r[3].as_u64().unwrap()).unwrap())
            .unwrap();
    }
    s
}

/// Builds `liblifedata.so` once per test binary, with its own target
/// directory (rusqlite's `bundled` and `loadable_extension` features must
/// not meet in one build; every test binary uses the same directory, so a
/// `cargo test` run compiles it once), and returns its path without the
/// `.so`, as a user types it after `.load`.
pub fn extension_library() -> &'static std::path::Path {
    static LIB: std::sync::OnceLock<std::path::PathBuf> = std::sync::OnceLock::new();
    LIB.get_or_init(|| {
        let target = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("extension-build");
        let status = std::process::Command::new(env!("CARGO"))
            .args(["build", "--release", "-p", "lifedata-ext", "--target-dir"])
            .arg(&target)
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .status()
            .expect("run cargo build for the extension");
        assert!(status.success(), "building the extension failed");
        let lib = target.join("release").join("liblifedata");
        assert!(
            lib.with_extension("so").exists(),
            "{} missing",
            lib.display()
        );
        lib
    })
}
