//! Median ranks, rank regression and the Kaplan-Meier estimate checked
//! against the outside.
//!
//! Reference values: scipy 1.17.1 (`scipy.special.betaincinv`,
//! `scipy.stats.norm.ppf`), numpy 2.4.6 cross-checked with mpmath 1.3.0 at 40
//! digits, and lifelines 0.30.3 (`KaplanMeierFitter`), produced by
//! `tests/reference/make_breadth_refs.py` into `fixtures/reference/breadth/`
//! (each file records its libraries and definitions). Run with
//! `--nocapture` to print the measured agreement.

use lifedata::dist::family;
use lifedata::fit::km::{kaplan_meier, Band};
use lifedata::fit::rank::{
    median_rank, plotting_positions, rank_regression, PlotPoint, Positions, Regress,
};
use lifedata::sample::{Obs, Sample};
use serde_json::Value;

fn load(path: &str) -> Value {
    let text = std::fs::read_to_string(format!("{}/{path}", env!("CARGO_MANIFEST_DIR")))
        .unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap()
}

fn rel(a: f64, b: f64) -> f64 {
    if a == b {
        0.0
    } else {
        (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
    }
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// Rows `[earliest, latest | null, entry, count]`, merged the way the SQL
/// aggregate merges them and returned in `Sample::obs()` order.
fn obs_of(rows: &Value) -> Vec<Obs> {
    let mut s = Sample::new();
    for r in rows.as_array().unwrap() {
        let latest = if r[1].is_null() { None } else { Some(f(&r[1])) };
        s.push(Sample::observation(f(&r[0]), latest, f(&r[2]), r[3].as_u64().unwrap()).unwrap())
            .unwrap();
    }
    s.obs()
}

/// `n` complete failures at ages 1..=n.
fn complete(n: u64) -> Vec<Obs> {
    let rows: Vec<(f64, bool, u64)> = (1..=n).map(|i| (i as f64, true, 1)).collect();
    Sample::from_rows(&rows).unwrap().obs()
}

/// Source: scipy.special.betaincinv(i, n - i + 1, 0.5) (scipy 1.17.1), for
/// whole order numbers (n = 1 to 50) and real, adjusted ones. Tolerance 1e-12
/// relative, through `median_rank` and through `plotting_positions`.
#[test]
fn exact_median_ranks_match_scipy_betaincinv() {
    let refs = load("fixtures/reference/breadth/median_ranks.json");
    let exact = refs["exact"].as_array().unwrap();
    assert!(exact.len() >= 50);
    let mut worst = (0.0f64, String::new());
    let mut note = |e: f64, what: String| {
        assert!(e < 1e-12, "{what}: off by {e:e}");
        if e >= worst.0 {
            worst = (e, what);
        }
    };
    for r in exact {
        let (n, i, want) = (f(&r["n"]), f(&r["i"]), f(&r["rank"]));
        let got = median_rank(i, n).unwrap();
        note(
            rel(got, want),
            format!("median_rank({i}, {n}) = {got} vs {want}"),
        );
        let pts = plotting_positions(&complete(n as u64), Positions::Exact).unwrap();
        let p = pts[i as usize - 1];
        assert_eq!(p.order, i);
        note(
            rel(p.unreliability, want),
            format!(
                "plotting position {i} of {n}: {} vs {want}",
                p.unreliability
            ),
        );
    }
    for r in refs["adjusted_exact"].as_array().unwrap() {
        let (n, j, want) = (f(&r["n"]), f(&r["j"]), f(&r["rank"]));
        let got = median_rank(j, n).unwrap();
        note(
            rel(got, want),
            format!("median_rank({j}, {n}) = {got} vs {want}"),
        );
    }
    eprintln!(
        "exact median ranks vs scipy betaincinv: worst {:.2e} ({})",
        worst.0, worst.1
    );
}

/// Source: Bernard's approximation (i - 0.3) / (n + 0.4) evaluated by the
/// reference script (Python floats). Tolerance 1e-12 relative.
#[test]
fn bernard_ranks_match_the_reference_script() {
    let refs = load("fixtures/reference/breadth/median_ranks.json");
    let bernard = refs["bernard"].as_array().unwrap();
    assert!(bernard.len() >= 50);
    let mut worst = 0.0f64;
    for r in bernard {
        let (n, i, want) = (f(&r["n"]), f(&r["i"]), f(&r["rank"]));
        let pts = plotting_positions(&complete(n as u64), Positions::Bernard).unwrap();
        let got = pts[i as usize - 1].unreliability;
        let e = rel(got, want);
        assert!(e < 1e-12, "Bernard rank {i} of {n}: {got} vs {want}");
        worst = worst.max(e);
    }
    eprintln!("Bernard ranks vs reference script: worst {worst:.2e}");
}

/// Source: the worked example of adjusted order numbers in
/// `median_ranks.json` ("johnson_example"): 11 units, 5 failures, ages chosen
/// by hand for lifedata; method of L. G. Johnson, The Statistical Treatment
/// of Fatigue Experiments (1964) (citation from memory). Its orders are exact
/// fractions, confirmed in the script by enumerating every ordering of the
/// lives; its ranks come from scipy. Tolerances: orders 1e-14, ranks 1e-12.
#[test]
fn johnson_worked_example() {
    let refs = load("fixtures/reference/breadth/median_ranks.json");
    let ex = &refs["johnson_example"];
    eprintln!("Johnson example source: {}", ex["source"].as_str().unwrap());
    let rows: Vec<(f64, bool, u64)> = ex["rows"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| (f(&r[0]), r[1].as_u64().unwrap() == 1, 1))
        .collect();
    let obs = Sample::from_rows(&rows).unwrap().obs();
    let n: f64 = obs.iter().map(|o| o.count).sum();
    assert_eq!(n, f(&ex["n"]));
    let fractions: Vec<f64> = ex["adjusted_order_exact_fractions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| {
            let (p, q) = v.as_str().unwrap().split_once('/').unwrap();
            p.parse::<f64>().unwrap() / q.parse::<f64>().unwrap()
        })
        .collect();
    let bernard = plotting_positions(&obs, Positions::Bernard).unwrap();
    let exact = plotting_positions(&obs, Positions::Exact).unwrap();
    assert_eq!(bernard.len(), fractions.len());
    let mut worst = [0.0f64; 3];
    for (k, frac) in fractions.iter().enumerate() {
        let eo = rel(bernard[k].order, *frac);
        let eb = rel(bernard[k].unreliability, f(&ex["bernard_rank"][k]));
        let ee = rel(exact[k].unreliability, f(&ex["exact_median_rank"][k]));
        assert!(eo < 1e-14, "order {k}: {} vs {frac}", bernard[k].order);
        assert!(eb < 1e-12 && ee < 1e-12, "rank {k}: {eb:e} {ee:e}");
        assert_eq!(exact[k].order, bernard[k].order);
        for (w, e) in worst.iter_mut().zip([eo, eb, ee]) {
            *w = w.max(e);
        }
    }
    eprintln!(
        "Johnson example: orders {:.2e}, Bernard ranks {:.2e}, exact ranks {:.2e}",
        worst[0], worst[1], worst[2]
    );
}

/// Source: least squares on the probability plot computed by the reference
/// script twice (numpy floats, and mpmath at 40 digits from exact-fraction
/// orders; the 40-digit values are written), for 60 cases: Weibull,
/// lognormal, normal, log-logistic and exponential; complete, suspended and
/// grouped (tied) data; Bernard and exact ranks; regression on y and on x.
/// Tolerances: plotted points 1e-12, parameters and correlation 1e-9 relative.
#[test]
fn rank_regression_matches_the_reference_script() {
    let refs = load("fixtures/reference/breadth/rank_regression.json");
    let cases = refs["cases"].as_array().unwrap();
    assert!(cases.len() >= 60);
    let (mut worst_pt, mut worst_par, mut worst_r) = (0.0f64, 0.0f64, 0.0f64);
    let mut worst_case = String::new();
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let fam = family(case["family"].as_str().unwrap())
            .unwrap_or_else(|| panic!("{name}: unknown family"));
        let positions = match case["ranks"].as_str().unwrap() {
            "bernard" => Positions::Bernard,
            "exact" => Positions::Exact,
            other => panic!("{name}: ranks {other}"),
        };
        let regress = match case["regress"].as_str().unwrap() {
            "y" => Regress::OnY,
            "x" => Regress::OnX,
            other => panic!("{name}: regress {other}"),
        };
        let obs = obs_of(&case["rows"]);

        let pts: Vec<PlotPoint> = plotting_positions(&obs, positions).unwrap();
        let want_pts = case["points"].as_array().unwrap();
        assert_eq!(pts.len(), want_pts.len(), "{name}: number of points");
        for (p, w) in pts.iter().zip(want_pts) {
            assert_eq!(p.age, f(&w[0]), "{name}");
            let e = rel(p.order, f(&w[1])).max(rel(p.unreliability, f(&w[2])));
            assert!(e < 1e-12, "{name}: point {p:?} vs {w}");
            worst_pt = worst_pt.max(e);
        }

        let fit = rank_regression(fam, &obs, positions, regress).unwrap();
        assert_eq!(fit.points, want_pts.len(), "{name}");
        for (info, got) in fam.params.iter().zip(&fit.params) {
            let want = f(&case["params"][info.name]);
            let e = rel(*got, want);
            assert!(e < 1e-9, "{name}: {} {got} vs {want}", info.name);
            if e > worst_par {
                worst_par = e;
                worst_case = format!("{name} {}", info.name);
            }
        }
        let e = rel(fit.correlation, f(&case["r"]));
        assert!(e < 1e-9, "{name}: r {} vs {}", fit.correlation, case["r"]);
        worst_r = worst_r.max(e);
    }
    eprintln!(
        "rank regression vs 40-digit reference: points {worst_pt:.2e}, parameters \
         {worst_par:.2e} ({worst_case}), correlation {worst_r:.2e}"
    );
}

/// Source: lifelines 0.30.3 `KaplanMeierFitter` (alpha 0.05; its interval is
/// the exponential Greenwood one on ln(-ln R)) for the estimate and the
/// log-log bounds; the reference script's own product, Greenwood variance and
/// linear bounds R -+ z sqrt(Var), z = scipy.stats.norm.ppf(0.975), written
/// unclipped (compared here after clamping to [0, 1]). Three data sets:
/// suspensions, grouped ties with suspensions at failure ages, left
/// truncation. Tolerances: at-risk and failure counts exact; survival and
/// variance 1e-12 relative; bounds 1e-12 relative.
#[test]
fn kaplan_meier_matches_lifelines() {
    let refs = load("fixtures/reference/breadth/kaplan_meier.json");
    let cases = refs["cases"].as_array().unwrap();
    assert!(cases.len() >= 3);
    let mut worst = [0.0f64; 4]; // survival, variance, log-log bounds, linear bounds
    let mut truncated_seen = false;
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let obs = obs_of(&case["rows"]);
        truncated_seen |= obs.iter().any(|o| o.entry > 0.0);
        let loglog = kaplan_meier(&obs, 0.95, Band::LogLog).unwrap();
        let linear = kaplan_meier(&obs, 0.95, Band::Linear).unwrap();
        let want = case["steps"].as_array().unwrap();
        assert_eq!(loglog.len(), want.len(), "{name}: number of steps");
        for ((s, l), w) in loglog.iter().zip(&linear).zip(want) {
            let t = f(&w["t"]);
            assert_eq!(s.age, t, "{name}");
            assert_eq!(s.at_risk, f(&w["at_risk"]), "{name} at {t}: at risk");
            assert_eq!(s.failures, f(&w["failures"]), "{name} at {t}: failures");
            let es = rel(s.reliability, f(&w["survival"]));
            let ev = rel(s.variance, f(&w["greenwood_var"]));
            let eb =
                rel(s.lower, f(&w["lifelines_lower"])).max(rel(s.upper, f(&w["lifelines_upper"])));
            let clamp = |v: &Value| f(v).clamp(0.0, 1.0);
            let el = rel(l.lower, clamp(&w["linear_lower"]))
                .max(rel(l.upper, clamp(&w["linear_upper"])));
            assert!(
                es < 1e-12,
                "{name} at {t}: survival {} vs {}",
                s.reliability,
                w
            );
            assert!(
                ev < 1e-12,
                "{name} at {t}: variance {} vs {}",
                s.variance,
                w
            );
            assert!(eb < 1e-12, "{name} at {t}: log-log bounds {s:?} vs {w}");
            assert!(el < 1e-12, "{name} at {t}: linear bounds {l:?} vs {w}");
            assert_eq!((l.reliability, l.variance), (s.reliability, s.variance));
            for (m, e) in worst.iter_mut().zip([es, ev, eb, el]) {
                *m = m.max(e);
            }
        }
    }
    assert!(
        truncated_seen,
        "no left-truncated case in the reference file"
    );
    eprintln!(
        "Kaplan-Meier vs lifelines: survival {:.2e}, Greenwood variance {:.2e}, \
         log-log bounds {:.2e}; linear bounds vs script {:.2e}",
        worst[0], worst[1], worst[2], worst[3]
    );
}
