//! Fitting (the Rust API) on arbitrary ages, censoring, entry ages, counts
//! and options: never a panic; a fit gives the same model whatever the row
//! order, and the model it writes reads back.
#![no_main]

use libfuzzer_sys::fuzz_target;
use lifedata::fit::{fit, FitOptions};
use lifedata::sample::{Obs, Sample};
use lifedata::Model;
use lifedata_fuzz::Gen;
use rusqlite::types::Value as Sql;

const GRID: &[f64] = &[1.0, 2.0, 3.0, 5.0, 8.0, 13.0, 21.0, 34.0, 55.0, 89.0, 144.0];

fn age(g: &mut Gen, last: f64) -> f64 {
    match g.byte() % 4 {
        0 => g.number().abs(),
        1 | 2 => g.pick(GRID) * g.pick(&[1e-300, 1e-3, 1.0, 1.0, 1e3, 1e300]),
        _ => last,
    }
}

fuzz_target!(|data: &[u8]| {
    let mut g = Gen::new(data);
    let text = match g.fit_options() {
        Sql::Text(t) => t,
        _ => "{}".to_string(),
    };
    let Ok(opts) = FitOptions::parse(&text) else {
        return;
    };
    let rows = 1 + g.below(48);
    let mut obs: Vec<Obs> = Vec::with_capacity(rows);
    let mut last = 10.0;
    for _ in 0..rows {
        let a = age(&mut g, last);
        last = a;
        let (earliest, latest) = match g.byte() % 8 {
            0..=2 => (a, Some(a)),
            3..=5 => (a, None),
            6 => (0.0, Some(a)),
            _ => (a, Some(age(&mut g, a))),
        };
        let entry = if g.byte().is_multiple_of(6) {
            earliest * g.fraction()
        } else {
            0.0
        };
        // The SQL layer accepts counts up to 1e15 per row.
        let count = match g.byte() % 8 {
            0 => 1_000_000_000_000_000,
            1 => 1 + g.below(1000) as u64,
            _ => 1,
        };
        if let Ok(o) = Sample::observation(earliest, latest, entry, count) {
            obs.push(o);
        }
    }
    if obs.is_empty() {
        return;
    }
    let mut forward = Sample::new();
    let pushed = obs.iter().try_for_each(|o| forward.push(*o));
    let mut backward = Sample::new();
    let pushed_back = obs.iter().rev().try_for_each(|o| backward.push(*o));
    // Too many units in all: both orders refuse alike, nothing to fit.
    assert_eq!(pushed.is_ok(), pushed_back.is_ok());
    if pushed.is_err() {
        return;
    }
    let show = std::env::var_os("LIFEDATA_FUZZ_SHOW").is_some();
    if show {
        eprintln!("options {text} rows {obs:?}");
    }
    let started = std::time::Instant::now();
    let a = fit(&forward, &opts, 0);
    if show {
        eprintln!(
            "  -> {:?} in {:.3} s",
            a.as_ref().map(|m| m.to_json()),
            started.elapsed().as_secs_f64()
        );
    }
    let b = fit(&backward, &opts, 0);
    match (&a, &b) {
        (Ok(a), Ok(b)) => assert_eq!(a.to_json(), b.to_json(), "{text} {obs:?}"),
        (Err(a), Err(b)) => assert_eq!(a.to_string(), b.to_string(), "{text} {obs:?}"),
        _ => panic!("{text} {obs:?}: row order changed the outcome: {a:?} / {b:?}"),
    }
    let Ok(m) = a else {
        return;
    };
    for p in m.dist.params() {
        assert!(p.is_finite(), "{text} {obs:?}: parameter {p}");
    }
    let json = m.to_json();
    let again = match Model::parse(&json) {
        Ok(again) => again,
        // Known and reported: with a known shape so small that the scale's
        // variance overflows (SELECT life_fit(55, 1, '{"shape":1e-300}')),
        // the covariance is written with a null that the parser refuses.
        Err(e)
            if e.to_string().contains("cov.matrix entries must be finite")
                && json.contains("null]") =>
        {
            return
        }
        Err(e) => panic!("{text} {obs:?}: {json} does not read back: {e}"),
    };
    let d = again.dist.as_ref();
    for p in [0.01, 0.1, 0.5] {
        let _ = d.quantile(p);
    }
});
