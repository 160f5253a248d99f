//! Fleet failure forecasts (`decide::forecast`) checked against the outside.
//!
//! Reference values: `fixtures/reference/forecast.json`, written by
//! `tests/reference/make_forecast_refs.py` (numpy 2.4.6, scipy 1.17.1; the
//! file names the versions): Poisson-binomial pmfs by direct convolution
//! (numpy.convolve, exact rational arithmetic for small sets,
//! scipy.stats.poisson_binom), seeded numpy simulations of the count and of
//! renewals. Closed forms used here: the moments sum p and sum p(1 - p);
//! exponential lives renewed at failure form a Poisson process, and gamma
//! lives of shape 2 are two exponential phases, so both renewal counts are
//! Poisson counts (Poisson distribution from statrs).
//! Run with `--nocapture` to print the measured agreement.

mod common;

use common::{f, load};
use lifedata::decide::forecast::{
    combine, failure_pmf, poisson_binomial, poisson_binomial_approx, renewal_count_pmf,
    renewal_expected_failures, RenewalForecast, DISCARD_BUDGET, EXACT_MAX_UNITS,
};
use lifedata::dist::exponential::Exponential;
use lifedata::dist::gamma::Gamma;
use lifedata::dist::weibull::Weibull;
use lifedata::dist::weibull3::Weibull3;
use lifedata::dist::LifeDistribution;
use serde_json::Value;
use statrs::distribution::{Discrete, DiscreteCDF, Poisson};

fn refs() -> Value {
    load("fixtures/reference/forecast.json")
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array().unwrap().iter().map(f).collect()
}

/// The probabilities of a fixture set, regenerated from the recipe where the
/// file gives one (and checked against the head and sum it writes).
fn probs_of(case: &Value) -> Vec<f64> {
    if case["probs"].is_array() {
        return floats(&case["probs"]);
    }
    let n = case["n"].as_u64().unwrap();
    let p: Vec<f64> = (0..n)
        .map(|i| ((7919 * i + 13) % 10007) as f64 / 10007.0 * 0.2)
        .collect();
    for (a, b) in p.iter().zip(floats(&case["probs_head"])) {
        assert_eq!(a.to_bits(), b.to_bits(), "recipe differs from the script");
    }
    let s: f64 = p.iter().sum();
    assert!((s - f(&case["probs_sum"])).abs() < 1e-9);
    p
}

/// Largest |P_ours(N <= k) - P_other(N <= k)| over all k.
fn worst_cdf_diff(a: &[f64], b: &[f64]) -> f64 {
    let (mut ca, mut cb, mut worst) = (0.0, 0.0, 0.0f64);
    for k in 0..a.len().max(b.len()) {
        ca += a.get(k).copied().unwrap_or(0.0);
        cb += b.get(k).copied().unwrap_or(0.0);
        worst = worst.max((ca - cb).abs());
    }
    worst
}

fn pmf_mean_var(pmf: &[f64]) -> (f64, f64) {
    let m: f64 = pmf.iter().enumerate().map(|(k, p)| k as f64 * p).sum();
    let v: f64 = pmf
        .iter()
        .enumerate()
        .map(|(k, p)| (k as f64 - m).powi(2) * p)
        .sum();
    (m, v)
}

/// Source: forecast.json "poisson_binomial" (numpy.convolve of [1 - p, p]
/// factors in float64; for 5 and 50 units exact rational convolution rounded
/// to double; scipy.stats.poisson_binom agrees with numpy to 0 difference).
/// Every term within 1e-12 absolute and within the trimming budget (5e-16)
/// plus 1e-13 relative; outside the written range (where the reference is
/// below 1e-300) ours below that too.
#[test]
fn exact_pmf_matches_direct_convolution() {
    let r = refs();
    eprintln!("source: {} ({})", r["generator"], r["libraries"]);
    for case in r["poisson_binomial"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let probs = probs_of(case);
        let ours = poisson_binomial(&probs).unwrap();
        assert!(ours.exact, "{name}");
        let offset = case["pmf_offset"].as_u64().unwrap() as usize;
        let theirs = floats(&case["pmf"]);
        let (mut worst_abs, mut worst_rel) = (0.0f64, 0.0f64);
        for k in 0..ours.pmf.len().max(offset + theirs.len()) {
            let a = ours.pmf.get(k).copied().unwrap_or(0.0);
            let b = if k >= offset {
                theirs.get(k - offset).copied().unwrap_or(0.0)
            } else {
                0.0
            };
            let d = (a - b).abs();
            // 1e-12 absolute as asked; and tighter: the trimming discards at
            // most DISCARD_BUDGET in all, the rest is rounding (~1e-13 relative).
            assert!(
                d <= 1e-12 && d <= DISCARD_BUDGET + 1e-13 * b,
                "{name}: P(N = {k}) = {a}, reference {b}"
            );
            worst_abs = worst_abs.max(d);
            if b > 1e-6 {
                worst_rel = worst_rel.max(d / b);
            }
        }
        let total: f64 = ours.pmf.iter().sum();
        eprintln!(
            "{name}: n {}, worst |diff| {worst_abs:.2e}, worst relative diff where P > 1e-6 \
             {worst_rel:.2e}, 1 - total {:.2e}",
            probs.len(),
            1.0 - total
        );
        assert!((total - 1.0).abs() <= 1e-14, "{name}: total {total}");
    }
}

/// Source: closed forms mean = sum p, variance = sum p(1 - p) (the
/// fixture's values, summed with math.fsum). The struct's mean and sd and the
/// moments of the pmf itself.
#[test]
fn mean_and_sd_match_closed_forms() {
    for case in refs()["poisson_binomial"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let ours = poisson_binomial(&probs_of(case)).unwrap();
        let (mean, var) = (f(&case["mean"]), f(&case["var"]));
        assert!((ours.mean - mean).abs() <= 1e-13 * mean.max(1.0), "{name}");
        assert!(
            (ours.sd - var.sqrt()).abs() <= 1e-13 * var.sqrt().max(1.0),
            "{name}"
        );
        let (m, v) = pmf_mean_var(&ours.pmf);
        eprintln!(
            "{name}: pmf mean {m} vs sum p {mean} ({:.1e} rel), pmf var {v} vs sum pq {var} ({:.1e} rel)",
            (m - mean).abs() / mean,
            (v - var).abs() / var
        );
        assert!((m - mean).abs() <= 1e-11 * mean, "{name}: mean {m}");
        assert!((v - var).abs() <= 1e-10 * var, "{name}: variance {v}");
    }
}

/// Source: forecast.json quantiles (smallest k with P(N <= k) >= q, from the
/// exact rational or numpy cdf; only where the cdf is more than 1e-9 from q).
#[test]
fn quantiles_match_reference() {
    let mut n = 0;
    for case in refs()["poisson_binomial"].as_array().unwrap() {
        let ours = poisson_binomial(&probs_of(case)).unwrap();
        for qk in case["quantiles"].as_array().unwrap() {
            let (q, k) = (f(&qk[0]), qk[1].as_u64().unwrap());
            assert_eq!(ours.quantile(q), k, "{} q = {q}", case["name"]);
            assert!(ours.cdf(k) >= q && (k == 0 || ours.cdf(k - 1) < q));
            n += 1;
        }
    }
    eprintln!("{n} quantiles identical to the reference");
    assert!(n >= 20);
}

/// Source: forecast.json "monte_carlo_count": seeded numpy simulation of
/// one fleet of 300 units, 1 000 000 draws. Every count's frequency within 5
/// binomial standard errors (plus 1 draw) of our exact pmf; the sample mean
/// within 5 standard errors.
#[test]
fn exact_pmf_agrees_with_monte_carlo() {
    let r = refs();
    let mc = &r["monte_carlo_count"];
    let draws = mc["draws"].as_u64().unwrap() as f64;
    let ours = poisson_binomial(&floats(&mc["probs"])).unwrap();
    let hist = floats(&mc["histogram"]);
    let mut worst_z = 0.0f64;
    for k in 0..hist.len().max(ours.pmf.len()) {
        let p = ours.pmf.get(k).copied().unwrap_or(0.0);
        let freq = hist.get(k).copied().unwrap_or(0.0) / draws;
        let se = (p * (1.0 - p) / draws).sqrt();
        assert!(
            (freq - p).abs() <= 5.0 * se + 1.0 / draws,
            "P(N = {k}) = {p}, simulated {freq}"
        );
        if se > 0.0 {
            worst_z = worst_z.max((freq - p).abs() / se);
        }
    }
    let se_mean = (f(&mc["sample_var"]) / draws).sqrt();
    let z_mean = (f(&mc["sample_mean"]) - ours.mean) / se_mean;
    eprintln!(
        "seed {}, {draws} draws: worst |z| per count {worst_z:.2}, mean z {z_mean:.2}",
        mc["seed"]
    );
    assert!(z_mean.abs() <= 5.0);
}

/// Deterministic mixed probabilities: a share of small ones and some large.
fn mixed_probs(n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| {
            let u = ((i as f64) * 0.618_033_988_749_894_9).fract();
            if i % 10 == 0 {
                0.2 + 0.7 * u
            } else {
                0.05 * u * u
            }
        })
        .collect()
}

/// Source: our exact pmf (checked against numpy above) against the refined
/// normal approximation. Measured worst cdf differences are printed; the
/// bounds asserted are those documented in `poisson_binomial_approx`.
#[test]
fn approximation_accuracy_against_exact() {
    let r = refs();
    let recipe = r["poisson_binomial"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "n20000_recipe")
        .unwrap();
    let cases: Vec<(&str, Vec<f64>, f64)> = vec![
        ("1000 units mixed", mixed_probs(1000), 6e-4),
        ("20000 units recipe", probs_of(recipe), 1.5e-5),
        ("100000 units mixed", mixed_probs(100_000), 6e-6),
    ];
    for (name, probs, bound) in cases {
        let exact = poisson_binomial(&probs).unwrap();
        let approx = poisson_binomial_approx(&probs).unwrap();
        assert!(!approx.exact);
        assert_eq!((approx.mean, approx.sd), (exact.mean, exact.sd));
        let worst = worst_cdf_diff(&exact.pmf, &approx.pmf);
        eprintln!(
            "{name}: sd {:.1}, worst |cdf difference| approximation vs exact {worst:.2e} (bound {bound:.0e})",
            exact.sd
        );
        assert!(worst <= bound, "{name}: {worst}");
        assert!((0.0..=1.0 + 1e-12).contains(&approx.pmf.iter().sum::<f64>()));
    }
    // Above the documented size with a large variance the approximation is used.
    let big = vec![0.5; EXACT_MAX_UNITS + 1];
    let d = poisson_binomial(&big).unwrap();
    assert!(!d.exact);
    let z = (d.quantile(0.975) as f64 + 0.5 - d.mean) / d.sd;
    assert!((z - 1.96).abs() < 0.01, "z {z}");
}

/// Source: definitions. p = 0 and p = 1 are exact; invalid p is an error
/// naming the value and its unit; an empty fleet is the certain count 0.
#[test]
fn certain_units_and_bad_probabilities() {
    let d = poisson_binomial(&[1.0, 0.0, 1.0, 0.0, 1.0]).unwrap();
    assert_eq!(d.pmf, vec![0.0, 0.0, 0.0, 1.0]);
    assert_eq!((d.mean, d.sd, d.exact), (3.0, 0.0, true));
    let d = poisson_binomial_approx(&[1.0, 1.0]).unwrap();
    assert_eq!((d.pmf.clone(), d.exact), (vec![0.0, 0.0, 1.0], true));
    let d = poisson_binomial(&[0.25, 1.0]).unwrap();
    assert_eq!(d.pmf, vec![0.0, 0.75, 0.25]);
    let d = poisson_binomial(&[]).unwrap();
    assert_eq!(d.pmf, vec![1.0]);
    assert_eq!((d.quantile(0.99), d.cdf(0)), (0, 1.0));
    for (bad, shown) in [(1.5, "1.5"), (-0.1, "-0.1"), (f64::NAN, "NaN")] {
        let e = poisson_binomial(&[0.1, bad]).unwrap_err().to_string();
        assert!(e.contains(shown) && e.contains("unit 2 of 2"), "{e}");
        let e = poisson_binomial_approx(&[bad]).unwrap_err().to_string();
        assert!(e.contains(shown), "{e}");
    }
    // Quantile edges: q <= 0, q = 1, NaN.
    let d = poisson_binomial(&[0.5, 0.5]).unwrap();
    assert_eq!(
        (d.quantile(0.0), d.quantile(0.25), d.quantile(0.2500001)),
        (0, 0, 1)
    );
    assert_eq!(
        (d.quantile(1.0), d.quantile(f64::NAN), d.cdf(99)),
        (2, 2, 1.0)
    );
}

fn weibull(shape: f64) -> Weibull {
    Weibull::new(shape, 1000.0).unwrap()
}

/// Source: forecast.json "renewal" (seeded numpy simulation, 1 000 000 draws
/// per case, Weibull shapes 2.5 and 0.8, horizons 0.5, 1 and 3 scales, ages
/// 0, 700, 1500). Per count within 5 binomial standard errors (plus 1 draw);
/// expected failures within 5 standard errors of the sample mean; P(N >= 1)
/// equal to scipy's conditional failure probability to 1e-12.
#[test]
fn renewal_pmf_agrees_with_monte_carlo() {
    let r = refs();
    let cases = r["renewal"]["cases"].as_array().unwrap();
    let (mut worst_z, mut worst_mean_z) = (0.0f64, 0.0f64);
    for shape in [2.5, 0.8] {
        let d = weibull(shape);
        for horizon in [500.0, 1000.0, 3000.0] {
            let forecast = RenewalForecast::new(&d, horizon, 100).unwrap();
            for case in cases
                .iter()
                .filter(|c| f(&c["shape"]) == shape && f(&c["horizon"]) == horizon)
            {
                let age = f(&case["age"]);
                let draws = case["draws"].as_u64().unwrap() as f64;
                let pmf = forecast.count_pmf(age).unwrap();
                let hist = floats(&case["histogram"]);
                for k in 0..hist.len().max(pmf.len()) {
                    let p = pmf.get(k).copied().unwrap_or(0.0);
                    let freq = hist.get(k).copied().unwrap_or(0.0) / draws;
                    let se = (p * (1.0 - p) / draws).sqrt();
                    assert!(
                        (freq - p).abs() <= 5.0 * se + 1.0 / draws,
                        "shape {shape} horizon {horizon} age {age}: P(N = {k}) = {p}, simulated {freq}"
                    );
                    if se > 0.0 {
                        worst_z = worst_z.max((freq - p).abs() / se);
                    }
                }
                let p1 = 1.0 - pmf[0];
                let scipy = f(&case["p_first_failure_scipy"]);
                assert!(
                    (p1 - scipy).abs() <= 1e-12 * scipy.max(1e-300),
                    "{p1} {scipy}"
                );
                let mean = forecast.expected_failures(age).unwrap();
                let z = (mean - f(&case["sample_mean"])) / (f(&case["sample_sd"]) / draws.sqrt());
                worst_mean_z = worst_mean_z.max(z.abs());
                assert!(
                    z.abs() <= 5.0,
                    "shape {shape} horizon {horizon} age {age}: z {z}"
                );
            }
        }
    }
    eprintln!(
        "renewal vs simulation ({} cases): worst |z| per count {worst_z:.2}, worst |z| of the mean {worst_mean_z:.2}",
        cases.len()
    );
}

/// Source: forecast.json "renewal.fleet" (seeded numpy simulation of the
/// total over 6 positions, 1 000 000 draws), against `combine` of the
/// positions' renewal pmfs.
#[test]
fn renewal_fleet_agrees_with_monte_carlo() {
    let r = refs();
    let fleet = &r["renewal"]["fleet"];
    let d = Weibull::new(f(&fleet["shape"]), f(&fleet["scale"])).unwrap();
    let forecast = RenewalForecast::new(&d, f(&fleet["horizon"]), 100).unwrap();
    let pmfs: Vec<Vec<f64>> = floats(&fleet["ages"])
        .iter()
        .map(|&a| forecast.count_pmf(a).unwrap())
        .collect();
    let total = combine(&pmfs).unwrap();
    let draws = fleet["draws"].as_u64().unwrap() as f64;
    let hist = floats(&fleet["histogram"]);
    let mut worst_z = 0.0f64;
    for k in 0..hist.len().max(total.pmf.len()) {
        let p = total.pmf.get(k).copied().unwrap_or(0.0);
        let freq = hist.get(k).copied().unwrap_or(0.0) / draws;
        let se = (p * (1.0 - p) / draws).sqrt();
        assert!(
            (freq - p).abs() <= 5.0 * se + 1.0 / draws,
            "P(N = {k}) = {p}, simulated {freq}"
        );
        if se > 0.0 {
            worst_z = worst_z.max((freq - p).abs() / se);
        }
    }
    let z_mean = (total.mean - f(&fleet["sample_mean"])) / (f(&fleet["sample_sd"]) / draws.sqrt());
    let z_sd =
        (total.sd - f(&fleet["sample_sd"])) / (f(&fleet["sample_sd"]) / (2.0 * draws).sqrt());
    eprintln!(
        "fleet of 6: mean {:.5} (z {z_mean:.2}), sd {:.4} (z {z_sd:.2}), worst |z| per count {worst_z:.2}",
        total.mean, total.sd
    );
    assert!(z_mean.abs() <= 5.0 && z_sd.abs() <= 5.0);
    // The combined mean is the sum of the positions' expected failures.
    let sum: f64 = floats(&fleet["ages"])
        .iter()
        .map(|&a| forecast.expected_failures(a).unwrap())
        .sum();
    assert!((sum - total.mean).abs() <= 1e-12 * sum);
}

fn poisson(mean: f64) -> Poisson {
    Poisson::new(mean).unwrap()
}

/// Source: closed form. Exponential lives renewed at failure form a Poisson
/// process whatever the current unit's age, so the count within h is Poisson
/// with mean h/theta (statrs' Poisson). Horizons of 0.5 to 10 mean lives at
/// the default grid; the measured worst error is printed.
#[test]
fn renewal_of_exponential_lives_is_poisson() {
    let d = Exponential::new(100.0).unwrap();
    let mut worst = 0.0f64;
    for (horizon, age) in [(50.0, 0.0), (300.0, 37.0), (1000.0, 500.0)] {
        let pmf = renewal_count_pmf(&d, age, horizon, 200).unwrap();
        let po = poisson(horizon / 100.0);
        for (k, p) in pmf.iter().enumerate() {
            worst = worst.max((p - po.pmf(k as u64)).abs());
        }
        assert!(po.sf(pmf.len() as u64 - 1) < 1e-15, "pmf stops too early");
        let mean = renewal_expected_failures(&d, age, horizon).unwrap();
        let rel = (mean - horizon / 100.0).abs() / (horizon / 100.0);
        eprintln!("exponential, horizon {horizon}: expected failures relative error {rel:.1e}");
        assert!(rel <= 5e-6, "mean {mean}");
    }
    eprintln!("exponential renewals vs Poisson: worst pmf error {worst:.2e}");
    assert!(worst <= 1e-6);
}

/// Source: closed form. A gamma life of shape 2 and scale theta is two
/// exponential phases; phases complete as a Poisson process of rate
/// 1/theta. A unit that has survived to age a is in its second phase with
/// probability (a/theta)/(1 + a/theta), so
/// P(N >= n) = pi2 P(Poisson >= 2n - 1) + pi1 P(Poisson >= 2n), Poisson mean
/// h/theta (statrs). A smooth density with a rising hazard, current ages 0
/// and 80.
#[test]
fn renewal_of_gamma2_lives_is_poisson_of_phases() {
    let theta = 50.0;
    let d = Gamma::new(2.0, theta).unwrap();
    let mut worst = 0.0f64;
    for horizon in [50.0, 300.0] {
        let forecast = RenewalForecast::new(&d, horizon, 100).unwrap();
        let po = poisson(horizon / theta);
        let at_least = |m: u64| if m == 0 { 1.0 } else { po.sf(m - 1) };
        for age in [0.0, 80.0] {
            let a = age / theta;
            let (pi2, pi1) = (a / (1.0 + a), 1.0 / (1.0 + a));
            let ge = |n: u64| {
                if n == 0 {
                    1.0
                } else {
                    pi2 * at_least(2 * n - 1) + pi1 * at_least(2 * n)
                }
            };
            let pmf = forecast.count_pmf(age).unwrap();
            for (k, p) in pmf.iter().enumerate() {
                worst = worst.max((p - (ge(k as u64) - ge(k as u64 + 1))).abs());
            }
            let mean: f64 = (1..200).map(ge).sum();
            let ours = forecast.expected_failures(age).unwrap();
            assert!((ours - mean).abs() <= 1e-6 * mean, "{ours} {mean}");
        }
    }
    eprintln!("gamma (shape 2) renewals vs phase counts: worst pmf error {worst:.2e}");
    assert!(worst <= 1e-6);
}

/// Source: definitions. Without renewal the pmf of one position is
/// [1 - p, p] with p the model's conditional failure probability; with
/// renewal P(N = 0) and P(N >= 1) are the same; where a new unit cannot fail
/// within the horizon (3-parameter Weibull, failure-free period longer than
/// the horizon) the renewal pmf is [1 - p, p]; the pmf's mean equals the
/// expected failures from the renewal function.
#[test]
fn renewal_reduces_to_one_failure_and_keeps_its_mean() {
    let w = weibull(2.5);
    for (age, horizon) in [(0.0, 100.0), (900.0, 250.0), (2000.0, 3000.0)] {
        let p = w.cond_fail(age, horizon);
        let single = failure_pmf(&w, age, horizon).unwrap();
        assert_eq!(single[1], p);
        assert!((single[0] - (1.0 - p)).abs() <= 1e-16);
        let renewal = renewal_count_pmf(&w, age, horizon, 100).unwrap();
        assert!((renewal[0] - single[0]).abs() <= 1e-16);
        let (m, _) = pmf_mean_var(&renewal);
        let e = renewal_expected_failures(&w, age, horizon).unwrap();
        assert!((m - e).abs() <= 1e-12 * e.max(1e-300), "{m} {e}");
    }
    let w3 = Weibull3::new(2.5, 1000.0, 600.0).unwrap();
    for age in [0.0, 650.0, 1400.0] {
        let single = failure_pmf(&w3, age, 500.0).unwrap();
        let renewal = renewal_count_pmf(&w3, age, 500.0, 10).unwrap();
        assert_eq!(renewal.len(), if single[1] > 0.0 { 2 } else { 1 });
        for (a, b) in renewal.iter().zip(&single) {
            assert!((a - b).abs() <= 1e-16, "{renewal:?} vs {single:?}");
        }
        let e = renewal_expected_failures(&w3, age, 500.0).unwrap();
        assert!((e - single[1]).abs() <= 1e-15);
    }
    // A zero horizon: no failures for certain.
    assert_eq!(renewal_count_pmf(&w, 10.0, 0.0, 5).unwrap(), vec![1.0]);
}

/// Source: definitions. Combining [1 - p, p] pmfs is the Poisson-binomial
/// distribution; a fleet's mean and sd are the sums over positions.
#[test]
fn combine_of_single_failures_is_poisson_binomial() {
    let probs = mixed_probs(3000);
    let pmfs: Vec<Vec<f64>> = probs.iter().map(|&p| vec![1.0 - p, p]).collect();
    let a = combine(&pmfs).unwrap();
    let b = poisson_binomial(&probs).unwrap();
    let at = |v: &[f64], k: usize| v.get(k).copied().unwrap_or(0.0);
    let worst = (0..a.pmf.len().max(b.pmf.len()))
        .map(|k| (at(&a.pmf, k) - at(&b.pmf, k)).abs())
        .fold(0.0, f64::max);
    eprintln!("combine vs poisson_binomial (3000 units): worst |diff| {worst:.1e}");
    assert!(worst <= 1e-15);
    assert!((a.mean - b.mean).abs() <= 1e-12 * b.mean && (a.sd - b.sd).abs() <= 1e-12 * b.sd);
    assert_eq!(combine(&[]).unwrap().pmf, vec![1.0]);
}

/// Errors name the value: bad ages, horizons, max_count, pmfs.
#[test]
fn errors_name_the_value() {
    let w = weibull(0.8);
    let msg = |r: Result<Vec<f64>, lifedata::LifeError>| r.unwrap_err().to_string();
    assert!(msg(renewal_count_pmf(&w, -3.0, 100.0, 10))
        .contains("age must be a finite number >= 0, got -3"));
    assert!(msg(renewal_count_pmf(&w, 0.0, f64::NAN, 10)).contains("horizon"));
    assert!(msg(failure_pmf(&w, f64::INFINITY, 1.0)).contains("Inf"));
    // Many failures are likely within 30 scales: max_count 3 is too small.
    let e = msg(renewal_count_pmf(&w, 0.0, 30_000.0, 3));
    assert!(e.contains("max_count") && e.contains("got 3"), "{e}");
    assert!(RenewalForecast::new(&w, 100.0, 1001)
        .unwrap_err()
        .to_string()
        .contains("1001"));
    let e = combine(&[vec![0.5, 0.5], vec![0.5, 0.25]])
        .unwrap_err()
        .to_string();
    assert!(e.contains("0.75") && e.contains("position 2 of 2"), "{e}");
    let e = combine(&[vec![1.2, -0.2]]).unwrap_err().to_string();
    assert!(e.contains("-0.2"), "{e}");
    let e = combine(&[vec![]]).unwrap_err().to_string();
    assert!(e.contains("position 1"), "{e}");
}
