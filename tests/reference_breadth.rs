//! Bounds, the known-shape method and group comparisons checked against
//! the outside. Reference values: scipy 1.17.1 (with 50-digit mpmath
//! re-solutions where noted in the file), produced by
//! `tests/reference/make_breadth_refs.py` into `fixtures/reference/breadth/`.
//! Run with `--nocapture` to print the measured agreement.

mod common;
use common::{f, load, rel, sample_of};
use lifedata::dist;
use lifedata::fit::bounds::{bound, BoundMethod, Level, Quantity, Side};
use lifedata::fit::compare::compare_groups;
use lifedata::fit::{fit, FitOptions};
use lifedata::sample::Sample;

fn options(text: &str) -> FitOptions {
    FitOptions::parse(text).unwrap()
}

/// Source: lr_bounds.json — profile-likelihood crossings solved with scipy
/// and re-solved at 50 digits with mpmath; Fisher-matrix bounds with the
/// transforms in its "definitions". Tolerances: LR 1e-6 relative (our
/// profile is maximised numerically), Fisher 1e-5 (our covariance comes
/// from a finite-difference or analytic information matrix).
#[test]
fn bounds_match_scipy_profile_likelihood_and_fisher() {
    let refs = load("fixtures/reference/breadth/lr_bounds.json");
    let (mut worst_lr, mut worst_fisher, mut checked) = (0.0f64, 0.0f64, 0);
    for case in refs["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let fam = case["family"].as_str().unwrap();
        let s = sample_of(&case["rows"]);
        let m = fit(
            &s,
            &options(&format!(r#"{{"dist":"{fam}","keep_sample":true}}"#)),
            0,
        )
        .unwrap();
        let family = dist::family(fam).unwrap();
        for (i, p) in family.params.iter().enumerate() {
            assert!(
                rel(m.dist.params()[i], f(&case["mle"][p.name])) < 1e-7,
                "{name}: {} {} vs {}",
                p.name,
                m.dist.params()[i],
                case["mle"][p.name]
            );
        }
        for b in case["bounds"].as_array().unwrap() {
            let q = match b["quantity"].as_str().unwrap() {
                "b_life" => Quantity::Quantile(f(&b["p"])),
                "reliability" => Quantity::Reliability(f(&b["t"])),
                "param" => {
                    Quantity::Param(family.param_index(b["param"].as_str().unwrap()).unwrap())
                }
                other => panic!("{other}"),
            };
            let level = Level::new(f(&b["conf"]), b["sides"].as_i64().unwrap()).unwrap();
            let (method, tol) = match b["method"].as_str().unwrap() {
                "lr" => (BoundMethod::LikelihoodRatio, 1e-6),
                _ => (BoundMethod::Fisher, 1e-5),
            };
            for (side, key) in [(Side::Lower, "lower"), (Side::Upper, "upper")] {
                let got = bound(&m, q, level, method, side).unwrap();
                let e = rel(got, f(&b[key]));
                assert!(e < tol, "{name} {b}: {key} {got} (rel {e:e})");
                if method == BoundMethod::LikelihoodRatio {
                    worst_lr = worst_lr.max(e);
                } else {
                    worst_fisher = worst_fisher.max(e);
                }
                checked += 1;
            }
        }
    }
    eprintln!("{checked} bounds: worst relative LR {worst_lr:.1e}, Fisher {worst_fisher:.1e}");
}

/// Source: known_shape.json — the known-shape Weibull scale and its
/// chi-square lower bound eta_L = (2 sum t^beta / chi2(C; 2r+2))^(1/beta)
/// (formula attributed there, from memory, to Nelson 1985), computed with
/// scipy.stats.chi2. Tolerance 1e-10 relative.
#[test]
fn known_shape_scale_and_chi_square_bound() {
    let refs = load("fixtures/reference/breadth/known_shape.json");
    let mut worst = 0.0f64;
    for case in refs["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let shape = f(&case["shape"]);
        let s = sample_of(&case["rows"]);
        let m = fit(&s, &options(&format!(r#"{{"shape":{shape}}}"#)), 0).unwrap();
        let scale = m.dist.params()[1];
        if let Some(mle) = case["scale_mle"].as_f64() {
            let e = rel(scale, mle);
            assert!(e < 1e-8, "{name}: scale {scale} vs {mle}");
            worst = worst.max(e);
        } else {
            // Zero failures: the model's scale is the 63.2% lower bound,
            // (sum t^beta)^(1/beta).
            let e = rel(scale, f(&case["sum_t_pow_shape"]).powf(1.0 / shape));
            assert!(e < 1e-12, "{name}: scale {scale}");
        }
        for b in case["bounds"].as_array().unwrap() {
            let (c, want) = (f(&b[0]), f(&b[1]));
            let got = bound(
                &m,
                Quantity::Param(1),
                Level::new(c, 1).unwrap(),
                BoundMethod::ChiSquare,
                Side::Lower,
            )
            .unwrap();
            let e = rel(got, want);
            assert!(e < 1e-10, "{name} C={c}: {got} vs {want}");
            worst = worst.max(e);
        }
    }
    eprintln!("known-shape method: worst relative difference {worst:.1e}");
}

/// Source: group_tests.json — pooled, separate and common-shape fits
/// maximised tightly with scipy; statistics 2(l1 - l0), chi2.sf p-values.
/// Tolerances: log-likelihoods 1e-9 relative, statistics 1e-6 absolute.
#[test]
fn group_likelihood_ratio_tests_match_scipy() {
    let refs = load("fixtures/reference/breadth/group_tests.json");
    let mut worst = 0.0f64;
    for case in refs["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let fam = case["family"].as_str().unwrap();
        let groups: Vec<(String, Sample)> = case["groups"]
            .as_object()
            .unwrap()
            .iter()
            .map(|(g, rows)| (g.clone(), sample_of(rows)))
            .collect();
        let c = compare_groups(&groups, &options(&format!(r#"{{"dist":"{fam}"}}"#))).unwrap();
        for (got, want) in [
            (c.pooled_loglik, &case["pooled_loglik"]),
            (c.common_shape_loglik, &case["common_shape_loglik"]),
        ] {
            let e = rel(got, f(want));
            assert!(e < 1e-9, "{name}: loglik {got} vs {want}");
            worst = worst.max(e);
        }
        for (t, key) in [
            (&c.same_distribution, "same_distribution"),
            (&c.common_shape, "common_shape"),
            (
                &c.same_scale_given_common_shape,
                "same_scale_given_common_shape",
            ),
        ] {
            let want = &case["tests"][key];
            assert!(
                (t.statistic - f(&want["statistic"])).abs() < 1e-6,
                "{name} {key}: {t:?} vs {want}"
            );
            assert_eq!(t.df, f(&want["df"]), "{name} {key}");
            assert!(
                (t.p_value - f(&want["p"])).abs() < 1e-6,
                "{name} {key}: {t:?} vs {want}"
            );
        }
    }
    eprintln!("group tests: worst relative log-likelihood {worst:.1e}");
}
