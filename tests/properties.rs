//! Property tests (proptest) of invariants of every family and every fit:
//!
//! - quantile and unreliability invert each other, to a tolerance set by
//!   the conditioning of the inversion (see [`elasticity`]);
//! - reliability never rises with age; hazard and density are never
//!   negative; the conditional failure probability lies in [0, 1];
//! - maximum likelihood is equivariant under a change of age unit:
//!   multiplying every age by k multiplies the scale-type parameters by k
//!   and leaves the shapes alone;
//! - adding suspensions below the first failure does not lower the
//!   Weibull B10 life: a theorem with a known shape; with shape and scale
//!   both fitted it holds on Weibull-like samples but is not a theorem (the
//!   tests give the argument, a counterexample, and the direction: the
//!   suspensions add survival evidence, so the B10 rises).
//!
//! Case counts keep the file well under a minute in a debug build.

use lifedata::dist::{LifeDistribution, FAMILIES};
use lifedata::fit::{fit, FitOptions};
use lifedata::sample::Sample;
use lifedata::Model;
use proptest::prelude::*;
use proptest::test_runner::{RngSeed, TestCaseError};

const EPS: f64 = f64::EPSILON;

/// A fixed seed, so that every run checks the same cases (CI stays
/// reproducible; change the seed to explore), and no regression files
/// written beside the tests.
fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        cases,
        failure_persistence: None,
        rng_seed: RngSeed::Fixed(0x11fe_da7a),
        ..ProptestConfig::default()
    }
}

/// Maps three uniform draws in [0, 1] to valid parameters of a family, in
/// ranges met in practice: shapes 0.3 to 8 (gamma to 20), scales 1e-2 to
/// 1e6 (log-uniform), lognormal sigma 0.1 to 3, normal coefficient of
/// variation 2% to 40%, weibull3 locations up to twice the scale.
fn params_for(name: &str, a: f64, b: f64, c: f64) -> Vec<f64> {
    let shape = 0.3 * (8.0f64 / 0.3).powf(a);
    let scale = 1e-2 * 1e8f64.powf(b);
    match name {
        "weibull" | "loglogistic" => vec![shape, scale],
        "weibull3" => vec![shape, scale, 2.0 * c * scale],
        "exponential" => vec![scale],
        "lognormal" => vec![scale.ln(), 0.1 * 30f64.powf(a)],
        "normal" => vec![scale, scale * (0.02 + 0.38 * c)],
        "gamma" => vec![0.2 * 100f64.powf(a), scale],
        other => panic!("family {other} has no parameter strategy here: add one"),
    }
}

fn dist_of(fam: usize, a: f64, b: f64, c: f64) -> Box<dyn LifeDistribution> {
    let f = FAMILIES[fam];
    (f.build)(&params_for(f.name, a, b, c)).expect("valid parameters")
}

/// Every family has a strategy (the test fails when one is added without).
#[test]
fn every_family_has_a_strategy() {
    assert_eq!(FAMILIES.len(), 7);
    for f in FAMILIES {
        let p = params_for(f.name, 0.5, 0.5, 0.5);
        (f.build)(&p).unwrap_or_else(|e| panic!("{}: {e}", f.name));
    }
}

/// Elasticity of the smaller tail probability with respect to age at `t`:
/// t f(t) / min(F(t), R(t)). A relative error d in an age moves the tail
/// probability by about elasticity * d relative, and a relative error e in
/// the tail probability moves the age by e / elasticity: it is the
/// condition number of the inversion in both directions.
fn elasticity(d: &dyn LifeDistribution, t: f64) -> f64 {
    t * d.pdf(t) / d.cdf(t).min(d.sf(t))
}

/// Relative difference of the smaller tail probabilities at `t` from `p`
/// (the lower tail below the median, the upper tail above it; the upper
/// tail is read from the reliability directly, free of cancellation).
fn tail_error(d: &dyn LifeDistribution, t: f64, p: f64) -> f64 {
    if p <= 0.5 {
        (d.cdf(t) - p).abs() / p
    } else {
        (d.sf(t) - (1.0 - p)).abs() / (1.0 - p)
    }
}

/// A probability spread over the range that double precision can invert:
/// lower tail down to 1e-12, upper tail (1 - p) down to 1e-6. Below the
/// latter the input p itself carries a relative error of eps / (1 - p) in
/// its tail, which no quantile can undo.
fn probability() -> impl Strategy<Value = f64> {
    prop_oneof![
        (-12.0f64..-0.31).prop_map(|e| 10f64.powf(e)),
        (-6.0f64..-0.31).prop_map(|e| 1.0 - 10f64.powf(e)),
        0.01f64..0.99,
    ]
}

proptest! {
    #![proptest_config(config(2000))]

    /// F(Q(p)) = p. The quantile is exact to a few ulps for the closed-form
    /// families and to about 1e-14 relative for the gamma (a numerical
    /// inverse): an age error of 1e-13 relative moves the tail probability
    /// by elasticity * 1e-13. Plus 64 ulps for evaluating F itself.
    #[test]
    fn cdf_inverts_quantile(fam in 0..7usize, a in 0.0..1.0f64, b in 0.0..1.0f64,
                            c in 0.0..1.0f64, p in probability()) {
        let d = dist_of(fam, a, b, c);
        let t = d.quantile(p);
        // A normal puts mass below age 0: its quantiles there are negative
        // and outside the readers' domain (ages >= 0).
        prop_assume!(t > 0.0);
        let err = tail_error(d.as_ref(), t, p);
        let tol = 64.0 * EPS + 1e-13 * elasticity(d.as_ref(), t).max(1.0);
        prop_assert!(err <= tol, "{:?}: p {p:e}, Q(p) {t:e}, relative error {err:e} > {tol:e}", d);
    }

    /// Q(F(t)) = t for ages whose tail probability lies in the invertible
    /// range. The probability F(t) carries a relative error of about 64 ulps
    /// in its smaller tail (plus eps / (1 - p) in the upper tail, where p
    /// is rounded to absolute precision), which the inversion divides by
    /// the elasticity; the quantile adds its own 1e-13.
    #[test]
    fn quantile_inverts_cdf(fam in 0..7usize, a in 0.0..1.0f64, b in 0.0..1.0f64,
                            c in 0.0..1.0f64, u in probability()) {
        let d = dist_of(fam, a, b, c);
        let t = d.quantile(u);
        prop_assume!(t > 0.0);
        let p = d.cdf(t);
        prop_assume!((1e-12..=1.0 - 1e-6).contains(&p));
        let back = d.quantile(p);
        let err = (back - t).abs() / t;
        let prob_err = 64.0 * EPS + if p > 0.5 { EPS / (1.0 - p) } else { 0.0 };
        let tol = 1e-13 + prob_err / elasticity(d.as_ref(), t);
        prop_assert!(err <= tol, "{:?}: t {t:e}, F(t) {p:e}, Q(F(t)) {back:e}, relative error {err:e} > {tol:e}", d);
    }

    /// R(t) never rises with age, also between ages one ulp-scale apart.
    #[test]
    fn reliability_is_non_increasing(fam in 0..7usize, a in 0.0..1.0f64, b in 0.0..1.0f64,
                                     c in 0.0..1.0f64, u in 0.0..1.0f64, v in 0.0..1.0f64,
                                     close in any::<bool>()) {
        let d = dist_of(fam, a, b, c);
        let span = d.quantile(1.0 - 1e-9).max(d.quantile(0.5));
        let t1 = u * span;
        let t2 = if close { t1 * (1.0 + 4.0 * EPS) + f64::MIN_POSITIVE } else { t1 + v * span };
        let (r1, r2) = (d.sf(t1), d.sf(t2));
        prop_assert!(r2 <= r1, "{:?}: R({t1:e}) = {r1:e} < R({t2:e}) = {r2:e}", d);
        let (f1, f2) = (d.cdf(t1), d.cdf(t2));
        prop_assert!(f2 >= f1, "{:?}: F({t1:e}) = {f1:e} > F({t2:e}) = {f2:e}", d);
    }

    /// Hazard and density are numbers >= 0; the conditional failure
    /// probability is a probability, at any age and horizon, including ages
    /// far in the upper tail.
    #[test]
    fn hazard_and_conditional_failure_are_in_range(fam in 0..7usize, a in 0.0..1.0f64,
                                                   b in 0.0..1.0f64, c in 0.0..1.0f64,
                                                   u in 0.0..1.0f64, h in 0.0..1.0f64,
                                                   far in any::<bool>()) {
        let d = dist_of(fam, a, b, c);
        let span = d.quantile(if far { 1.0 - 1e-12 } else { 0.99 });
        let (t, horizon) = (u * span, h * span);
        let hz = d.hazard(t);
        prop_assert!(hz >= 0.0, "{:?}: hazard({t:e}) = {hz:e}", d);
        let f = d.pdf(t);
        prop_assert!(f >= 0.0, "{:?}: pdf({t:e}) = {f:e}", d);
        let q = d.cond_fail(t, horizon);
        prop_assert!((0.0..=1.0).contains(&q), "{:?}: cond_fail({t:e}, {horizon:e}) = {q:e}", d);
    }
}

/// A right-censored sample: ages from a Weibull (shape 0.7 to 5, scale 1
/// to 1000) at the given uniform positions; `flags[i]` says failed.
fn weibull_sample(shape: f64, scale: f64, us: &[f64], flags: &[bool]) -> Vec<(f64, bool)> {
    us.iter()
        .zip(flags)
        .map(|(&u, &f)| (scale * (-(-u).ln_1p()).powf(1.0 / shape), f))
        .collect()
}

fn sample_of(rows: &[(f64, bool)]) -> Sample {
    let mut s = Sample::new();
    for &(t, f) in rows {
        s.add(t, f).unwrap();
    }
    s
}

fn fit_rows(rows: &[(f64, bool)], opts: &FitOptions) -> Result<Model, String> {
    fit(&sample_of(rows), opts, 0).map_err(|e| e.to_string())
}

/// How a parameter moves when ages are multiplied by k: scale-type
/// parameters by k, lognormal mu by ln k, shapes not at all.
#[derive(Debug, Clone, Copy)]
enum Moves {
    Times,
    PlusLn,
    Stays,
}

fn moves(family: &str, param: &str) -> Moves {
    match (family, param) {
        (_, "scale") | (_, "location") | ("normal", _) => Moves::Times,
        ("lognormal", "mu") => Moves::PlusLn,
        (_, "shape") | ("lognormal", "sigma") => Moves::Stays,
        other => panic!("no scaling rule for {other:?}: add one"),
    }
}

fn data() -> impl Strategy<Value = (f64, f64, Vec<f64>, Vec<bool>)> {
    (0.7..5.0f64, 0.0..3.0f64, 6..30usize).prop_flat_map(|(shape, lg, n)| {
        (
            Just(shape),
            Just(10f64.powf(lg)),
            proptest::collection::vec(0.01..0.99f64, n),
            proptest::collection::vec(proptest::bool::weighted(0.7), n),
        )
    })
}

proptest! {
    #![proptest_config(config(300))]

    /// Maximum likelihood does not depend on the age unit, for every family:
    /// with every age multiplied by k, the fit's scale (and the weibull3
    /// location, the normal mu and sigma) is k times the fit's, lognormal mu
    /// moves by ln k, and shapes and lognormal sigma stay: to 1e-9 relative
    /// (the ages times k are rounded once), 1e-6 for the gamma and the
    /// 3-parameter Weibull (see the tolerance below). Either both fits
    /// succeed or both refuse with the same reason.
    #[test]
    fn fits_scale_with_the_age_unit((shape, scale, us, flags) in data(), lk in -3.0..3.0f64) {
        let k = 10f64.powf(lk);
        let rows = weibull_sample(shape, scale, &us, &flags);
        let scaled: Vec<(f64, bool)> = rows.iter().map(|&(t, f)| (t * k, f)).collect();
        for fam in FAMILIES {
            let opts = FitOptions::parse(&format!(r#"{{"dist":"{}"}}"#, fam.name)).unwrap();
            let (a, b) = (fit_rows(&rows, &opts), fit_rows(&scaled, &opts));
            let (a, b) = match (a, b) {
                (Ok(a), Ok(b)) => (a, b),
                (Err(ea), Err(eb)) => {
                    // Ages appear in some messages; compare the reasons only.
                    let reason = |e: &str| e.split(|c: char| c.is_ascii_digit()).next().unwrap_or("").to_string();
                    prop_assert_eq!(reason(&ea), reason(&eb), "{}", fam.name);
                    continue;
                }
                (a, b) => {
                    return Err(TestCaseError::fail(format!(
                        "{}: k {k:e}: one fit refused: {:?} / {:?}\nrows {rows:?}",
                        fam.name, a.map(|m| m.to_json()), b.map(|m| m.to_json()))));
                }
            };
            let (pa, pb) = (a.dist.params(), b.dist.params());
            let size = pa.iter().zip(fam.params).filter(|(_, i)| i.name == "scale").map(|(v, _)| *v).next();
            for ((x, y), info) in pa.iter().zip(&pb).zip(fam.params) {
                let (want, err) = match moves(fam.name, info.name) {
                    Moves::Times => {
                        // A location near 0 is measured against the scale.
                        let unit = if info.name == "location" { x.abs().max(size.unwrap()) } else { x.abs() };
                        (x * k, (y - x * k).abs() / (unit * k))
                    }
                    Moves::PlusLn => (x + k.ln(), (y - x - k.ln()).abs()),
                    Moves::Stays => (*x, (y - x).abs() / x.abs()),
                };
                // The Weibull's profile Newton solver reaches ~1e-14, the
                // generic search about 1e-11 for the exponential, lognormal,
                // normal and log-logistic (measured worst 3e-11). For the
                // gamma and the 3-parameter Weibull it stops short: over
                // 1 500 random samples of this kind, 14% of gamma and 26% of
                // weibull3 fit pairs differed by more than 1e-9 (worst 4.8e-7
                // and 1.4e-7; in the pairs checked against 40-digit maxima,
                // one fit of the pair was off by that much). Those two are
                // held to 1e-6 until the solver polishes them fully.
                let tol = if matches!(fam.name, "gamma" | "weibull3") { 1e-6 } else { 1e-9 };
                prop_assert!(err <= tol,
                    "{} {}: {x:e} with ages, {y:e} with ages x {k:e}, want {want:e} (error {err:e})\nrows {rows:?}",
                    fam.name, info.name);
            }
        }
    }
}

/// The rows with a suspension added at each of `fractions` times the first
/// failure age.
fn with_early_suspensions(rows: &[(f64, bool)], fractions: &[f64]) -> Vec<(f64, bool)> {
    let first = rows
        .iter()
        .filter(|r| r.1)
        .map(|r| r.0)
        .fold(f64::INFINITY, f64::min);
    let mut out = rows.to_vec();
    out.extend(fractions.iter().map(|&u| (first * u, false)));
    out
}

proptest! {
    #![proptest_config(config(300))]

    /// With a known Weibull shape the scale is (sum of t^shape / r)^(1/shape):
    /// a suspension adds a positive term, so the scale and every percentile
    /// life rise (a theorem). Checked for suspensions below the first failure.
    #[test]
    fn known_shape_suspensions_raise_b10((shape, scale, us, flags) in data(),
                                         fractions in proptest::collection::vec(0.0..1.0f64, 1..6),
                                         known in 0.5..4.0f64) {
        let rows = weibull_sample(shape, scale, &us, &flags);
        prop_assume!(rows.iter().any(|r| r.1));
        let more = with_early_suspensions(&rows, &fractions);
        let opts = FitOptions::parse(&format!(r#"{{"shape":{known}}}"#)).unwrap();
        let a = fit_rows(&rows, &opts).unwrap();
        let b = fit_rows(&more, &opts).unwrap();
        let (qa, qb) = (a.dist.quantile(0.1), b.dist.quantile(0.1));
        prop_assert!(qb >= qa, "B10 {qa:e} fell to {qb:e}\nrows {rows:?}\nadded {fractions:?}");
    }

    /// Maximum-likelihood Weibull (shape and scale free): suspensions added
    /// below the first failure do not lower the B10 life, on Weibull-like
    /// samples (shape 0.7 to 5, 6 to 30 lives, about 70% failed).
    ///
    /// Not a theorem. At a fixed shape the scale rises (above), but the
    /// shape moves too. Written with x = ln B10 and the shape b, the added
    /// term -(c/eta)^b = -k exp(b (ln c - x)), k = -ln 0.9, rises with x at
    /// every b, yet the joint maximum can still move to a lower x through
    /// the coupling with b: `adding_early_suspensions_can_lower_b10` below
    /// is such a case (shape near 0.16, B10 four decades beyond the
    /// failures). A random search (400 000 samples of 2 to 6 failures with
    /// up to 20 suspensions, ages spread over 3 decades) found none; spread
    /// over 8 decades with up to 40 suspensions, 145 in 400 000. The
    /// opposite reading, that such suspensions never raise the B10, fails
    /// on nearly every sample: the suspensions are evidence of survival.
    #[test]
    fn early_suspensions_do_not_lower_b10((shape, scale, us, flags) in data(),
                                          fractions in proptest::collection::vec(0.0..1.0f64, 1..6)) {
        let rows = weibull_sample(shape, scale, &us, &flags);
        let opts = FitOptions::default();
        let Ok(a) = fit_rows(&rows, &opts) else {
            // No failure, or every failure at the largest age: no fit either way.
            prop_assert!(fit_rows(&with_early_suspensions(&rows, &fractions), &opts).is_err());
            return Ok(());
        };
        let more = with_early_suspensions(&rows, &fractions);
        let b = fit_rows(&more, &opts).map_err(TestCaseError::fail)?;
        let (qa, qb) = (a.dist.quantile(0.1), b.dist.quantile(0.1));
        // The solver's last step is below 1e-12 relative.
        prop_assert!(qb >= qa * (1.0 - 1e-12),
            "B10 {qa:e} fell to {qb:e}\nrows {rows:?}\nadded below the first failure: {fractions:?}");
    }
}

/// The counterexample: one failure among twenty lives spread over six
/// decades; two suspensions at 1.2e-4, far below the failure at 119.6,
/// lower the B10 from 1 422 937.48 to 1 413 891.57. The values were
/// computed independently by bisection on the profile score
/// r/b + sum(ln t_f) - r * sum(t^b ln t) / sum(t^b) in plain Python
/// double precision (to a bracket of 1e-15), not with this library.
#[test]
fn adding_early_suspensions_can_lower_b10() {
    let rows: Vec<(f64, bool)> = [
        (119.55542273086412, true),
        (112532.60795955578, false),
        (486.01996338666504, false),
        (3.744685059269527, false),
        (1569437.2213461976, false),
        (119.5553901642766, false),
        (119.55538333761757, false),
        (7196.445090291343, false),
        (2268865.905368167, false),
        (89521.32106702776, false),
        (88.3614396458387, false),
        (33639.634834175224, false),
        (177863.39930484598, false),
        (585.3985795836429, false),
        (7.711824666258416, false),
        (1985.760446885357, false),
        (119.55536772995687, false),
        (1048182.3156805066, false),
        (1919024.7001884654, false),
        (23.179661592752804, false),
    ]
    .to_vec();
    let mut more = rows.clone();
    more.extend([(0.00011955542273086412, false); 2]);
    let opts = FitOptions::default();
    let (a, b) = (
        fit_rows(&rows, &opts).unwrap(),
        fit_rows(&more, &opts).unwrap(),
    );
    let (qa, qb) = (a.dist.quantile(0.1), b.dist.quantile(0.1));
    let rel = |x: f64, y: f64| (x - y).abs() / y;
    assert!(rel(qa, 1_422_937.475_077_639) < 1e-9, "{qa}");
    assert!(rel(qb, 1_413_891.573_531_663) < 1e-9, "{qb}");
    assert!(rel(a.dist.params()[0], 0.162_249_916_862_961_1) < 1e-9);
    assert!(rel(b.dist.params()[0], 0.164_042_082_695_119_8) < 1e-9);
    assert!(qb < qa);
}
