//! Kaplan-Meier (product-limit) reliability estimate with Greenwood
//! confidence bounds.
//!
//! At each distinct failure age t the estimate is multiplied by
//! (1 - d/n), where d units fail at t and n are at risk just before it.
//! A unit is at risk at t when entry < t <= its age (failure or suspension
//! age), so a unit that entered observation late (left truncation) counts
//! only after its entry age and a unit suspended at t is still at risk at t:
//! at equal ages failures happen before suspensions leave. A unit entering
//! at the age of a failure is not at risk for it; lifelines 0.30.3 does the
//! same (its `_additive_estimate` takes the units entering at t back out of
//! those at risk at t). A failure at its own entry age is refused: it would
//! fail without ever being at risk (lifelines counts such a failure while
//! leaving the unit out of the risk set). Greenwood's formula gives
//! Var R(t) = R(t)^2 * sum d / (n (n - d)). Knows nothing of SQL.

use crate::error::{show_number, LifeError, LifeResult};
use crate::fit::rank::unit_count;
use crate::sample::{Kind, Obs};
use statrs::distribution::{ContinuousCDF, Normal};

/// How the two-sided confidence bounds on the reliability are formed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Band {
    /// Normal bounds on ln(-ln R) (the "exponential Greenwood" form):
    /// R^exp(+-z s / ln R) with s^2 = sum d / (n (n - d)). Stays inside (0, 1).
    LogLog,
    /// Normal bounds on R itself: R +- z sqrt(Var R), clamped to [0, 1].
    Linear,
}

/// The estimate at one distinct failure age.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Step {
    /// Failure age; the estimate holds from this age up to the next step.
    pub age: f64,
    /// Units at risk just before `age`.
    pub at_risk: f64,
    /// Units failed at `age`.
    pub failures: f64,
    /// Product-limit reliability R just after `age`.
    pub reliability: f64,
    /// Greenwood variance of `reliability`.
    pub variance: f64,
    /// Lower confidence bound on the reliability.
    pub lower: f64,
    /// Upper confidence bound on the reliability.
    pub upper: f64,
}

/// Kaplan-Meier estimate from exact failures and suspensions (with counts
/// and entry ages), one [`Step`] per distinct failure age, with two-sided
/// `conf` bounds (0 < conf < 1) of the chosen [`Band`].
pub fn kaplan_meier(obs: &[Obs], conf: f64, band: Band) -> LifeResult<Vec<Step>> {
    if !(conf.is_finite() && conf > 0.0 && conf < 1.0) {
        return Err(LifeError::bad(
            "conf",
            "must be a number strictly between 0 and 1 (e.g. 0.9 for two-sided 90% bounds)",
            show_number(conf),
        ));
    }
    let z = Normal::standard().inverse_cdf(0.5 + 0.5 * conf);

    // (age, count) of failures, of every unit's end of observation, and of entries.
    let mut failures: Vec<(f64, f64)> = Vec::new();
    let mut ends: Vec<(f64, f64)> = Vec::with_capacity(obs.len());
    let mut entries: Vec<(f64, f64)> = Vec::with_capacity(obs.len());
    for o in obs {
        match o.kind() {
            Kind::Failure | Kind::Suspension => {}
            Kind::LeftCensored => {
                return Err(LifeError::NotEstimable(format!(
                    "the Kaplan-Meier estimate needs exact failure ages; got a left-censored \
                     life (failed before age {})",
                    show_number(o.latest)
                )))
            }
            Kind::Interval => {
                return Err(LifeError::NotEstimable(format!(
                    "the Kaplan-Meier estimate needs exact failure ages; got an \
                     interval-censored life (failed between ages {} and {})",
                    show_number(o.earliest),
                    show_number(o.latest)
                )))
            }
        }
        let c = unit_count(o)?;
        if o.failed() {
            if o.entry >= o.earliest {
                // At risk means entry < t <= age; a failure at its own entry
                // age would fail without ever being at risk.
                return Err(LifeError::NotEstimable(format!(
                    "the Kaplan-Meier estimate needs every failure to be at risk at its age; \
                     a failure at age {} entered observation at the same age",
                    show_number(o.earliest)
                )));
            }
            failures.push((o.earliest, c));
        }
        ends.push((o.earliest, c));
        entries.push((o.entry, c));
    }
    let by_age = |a: &(f64, f64), b: &(f64, f64)| a.0.total_cmp(&b.0);
    failures.sort_by(by_age);
    ends.sort_by(by_age);
    entries.sort_by(by_age);

    let mut steps: Vec<Step> = Vec::new();
    let (mut entered, mut left) = (0.0, 0.0); // units with entry < t; with age < t
    let (mut ie, mut ia) = (0, 0);
    let mut reliability = 1.0;
    let mut greenwood = 0.0; // sum d / (n (n - d))
    let mut i = 0;
    while i < failures.len() {
        let t = failures[i].0;
        let mut d = 0.0;
        while i < failures.len() && failures[i].0 == t {
            d += failures[i].1;
            i += 1;
        }
        while ie < entries.len() && entries[ie].0 < t {
            entered += entries[ie].1;
            ie += 1;
        }
        while ia < ends.len() && ends[ia].0 < t {
            left += ends[ia].1;
            ia += 1;
        }
        let n = entered - left;
        // Every unit failing at t entered before t and has age t, so n >= d.
        debug_assert!(n >= d);
        reliability *= (n - d) / n;
        if n > d {
            greenwood += d / (n * (n - d));
        }
        let variance = if reliability > 0.0 {
            reliability * reliability * greenwood
        } else {
            // Every unit at risk failed: R = 0 from here on, with no
            // sampling spread left in the product (the Greenwood term
            // d / (n (n - d)) is infinite, multiplied by R^2 = 0).
            0.0
        };
        let (lower, upper) = match band {
            Band::Linear => {
                let half = z * variance.sqrt();
                (
                    (reliability - half).clamp(0.0, 1.0),
                    (reliability + half).clamp(0.0, 1.0),
                )
            }
            Band::LogLog => loglog_bounds(reliability, greenwood, z),
        };
        steps.push(Step {
            age: t,
            at_risk: n,
            failures: d,
            reliability,
            variance,
            lower,
            upper,
        });
    }
    Ok(steps)
}

/// Bounds exp(-exp(ln(-ln R) +- z s / |ln R|)) with s^2 the Greenwood sum.
fn loglog_bounds(r: f64, greenwood: f64, z: f64) -> (f64, f64) {
    if r <= 0.0 {
        // ln(-ln R) is +infinity: both bounds collapse onto R = 0.
        return (0.0, 0.0);
    }
    if r >= 1.0 {
        // ln(-ln R) is -infinity: both bounds collapse onto R = 1.
        return (1.0, 1.0);
    }
    let ln_r = r.ln(); // < 0
    let w = z * greenwood.sqrt() / -ln_r;
    // R^exp(w) is the lower bound, R^exp(-w) the upper.
    let lower = (ln_r * w.exp()).exp();
    let upper = (ln_r * (-w).exp()).exp();
    (lower, upper)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fail(age: f64, count: f64) -> Obs {
        Obs {
            earliest: age,
            latest: age,
            entry: 0.0,
            count,
        }
    }
    fn susp(age: f64, count: f64) -> Obs {
        Obs {
            earliest: age,
            latest: f64::INFINITY,
            entry: 0.0,
            count,
        }
    }
    fn close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs()
    }
    /// z for two-sided 95%: the 0.975 point of the standard normal, 1.959963984540054 (from memory).
    const Z95: f64 = 1.959_963_984_540_054;

    #[test]
    fn product_limit_by_hand() {
        // F(3) S(4) F(6) x2, S(6), F(9), S(12): n = 7.
        // t=3: n=7, d=1, R = 6/7
        // t=6: n=5 (S(4) left; S(6) still at risk), d=2, R = 6/7 * 3/5 = 18/35
        // t=9: n=2, d=1, R = 18/35 * 1/2 = 9/35
        let obs = [
            fail(3.0, 1.0),
            susp(4.0, 1.0),
            fail(6.0, 2.0),
            susp(6.0, 1.0),
            fail(9.0, 1.0),
            susp(12.0, 1.0),
        ];
        let s = kaplan_meier(&obs, 0.95, Band::Linear).unwrap();
        assert_eq!(s.len(), 3);
        let want = [
            (3.0, 7.0, 1.0, 6.0 / 7.0),
            (6.0, 5.0, 2.0, 18.0 / 35.0),
            (9.0, 2.0, 1.0, 9.0 / 35.0),
        ];
        let sums = [
            1.0 / 42.0,
            1.0 / 42.0 + 2.0 / 15.0,
            1.0 / 42.0 + 2.0 / 15.0 + 0.5,
        ];
        for ((st, w), g) in s.iter().zip(want).zip(sums) {
            assert_eq!((st.age, st.at_risk, st.failures), (w.0, w.1, w.2));
            assert!(close(st.reliability, w.3, 1e-15));
            assert!(close(st.variance, w.3 * w.3 * g, 1e-14));
            let half = Z95 * st.variance.sqrt();
            assert!(close(st.lower, (w.3 - half).max(0.0), 1e-13) || st.lower == 0.0);
            assert!(close(st.upper, (w.3 + half).min(1.0), 1e-13));
        }
        // The last step's linear band reaches below 0: clamped.
        assert_eq!(s[2].lower, 0.0);
    }

    #[test]
    fn loglog_band_by_hand() {
        // 10 units, 2 failures at 5: R = 0.8, s^2 = 2/(10*8) = 0.025.
        let s = kaplan_meier(&[fail(5.0, 2.0), susp(20.0, 8.0)], 0.95, Band::LogLog).unwrap();
        let w = Z95 * 0.025f64.sqrt() / -(0.8f64.ln());
        let lower = 0.8f64.powf(w.exp());
        let upper = 0.8f64.powf((-w).exp());
        assert!(close(s[0].lower, lower, 1e-14), "{} {lower}", s[0].lower);
        assert!(close(s[0].upper, upper, 1e-14), "{} {upper}", s[0].upper);
        assert!(s[0].lower < 0.8 && 0.8 < s[0].upper && s[0].upper < 1.0);
    }

    #[test]
    fn left_truncation_enters_after_entry_age() {
        // A entered at 0, failed at 4; B entered at 4, failed at 6 (not at
        // risk at 4: entry < t is strict); C entered at 2, suspended at 10.
        // t=4: at risk A, C -> n=2, d=1, R=1/2
        // t=6: at risk B, C -> n=2, d=1, R=1/4
        let b = Obs {
            entry: 4.0,
            ..fail(6.0, 1.0)
        };
        let c = Obs {
            entry: 2.0,
            ..susp(10.0, 1.0)
        };
        let s = kaplan_meier(&[fail(4.0, 1.0), b, c], 0.9, Band::LogLog).unwrap();
        assert_eq!((s[0].at_risk, s[1].at_risk), (2.0, 2.0));
        assert_eq!((s[0].reliability, s[1].reliability), (0.5, 0.25));
        // Greenwood sum 1/2 + 1/2 = 1; Var = 1/16.
        assert!(close(s[1].variance, 1.0 / 16.0, 1e-15));
    }

    #[test]
    fn all_at_risk_failing_gives_zero_with_collapsed_bounds() {
        let s = kaplan_meier(&[fail(1.0, 1.0), fail(2.0, 2.0)], 0.95, Band::LogLog).unwrap();
        assert_eq!(s[1].reliability, 0.0);
        assert_eq!((s[1].variance, s[1].lower, s[1].upper), (0.0, 0.0, 0.0));
        let s = kaplan_meier(&[fail(1.0, 1.0), fail(2.0, 2.0)], 0.95, Band::Linear).unwrap();
        assert_eq!((s[1].variance, s[1].lower, s[1].upper), (0.0, 0.0, 0.0));
        // The limits of the log-log form.
        assert_eq!(loglog_bounds(1.0, 0.0, Z95), (1.0, 1.0));
        assert_eq!(loglog_bounds(0.0, 0.3, Z95), (0.0, 0.0));
    }

    #[test]
    fn input_order_does_not_matter() {
        let a = [
            susp(8.0, 2.0),
            fail(3.0, 1.0),
            fail(8.0, 1.0),
            fail(1.0, 3.0),
        ];
        let mut b = a;
        b.reverse();
        assert_eq!(
            kaplan_meier(&a, 0.9, Band::LogLog).unwrap(),
            kaplan_meier(&b, 0.9, Band::LogLog).unwrap()
        );
    }

    #[test]
    fn bad_input_is_named() {
        let e = kaplan_meier(&[fail(1.0, 1.0)], 1.0, Band::LogLog).unwrap_err();
        assert_eq!(
            e.to_string(),
            "conf must be a number strictly between 0 and 1 (e.g. 0.9 for two-sided 90% \
             bounds), got 1"
        );
        assert!(kaplan_meier(&[fail(1.0, 1.0)], f64::NAN, Band::Linear).is_err());
        let inter = Obs {
            earliest: 2.0,
            latest: 3.0,
            entry: 0.0,
            count: 1.0,
        };
        let e = kaplan_meier(&[inter], 0.9, Band::Linear).unwrap_err();
        assert!(matches!(e, LifeError::NotEstimable(_)));
        assert!(e.to_string().contains("between ages 2 and 3"), "{e}");
        let at_entry = Obs {
            entry: 5.0,
            ..fail(5.0, 1.0)
        };
        let e = kaplan_meier(&[at_entry], 0.9, Band::Linear).unwrap_err();
        assert!(e
            .to_string()
            .contains("failure at age 5 entered observation at the same age"));
        // Suspensions alone give no steps.
        assert!(kaplan_meier(&[susp(3.0, 4.0)], 0.9, Band::Linear)
            .unwrap()
            .is_empty());
    }
}

/// Options of the Kaplan-Meier aggregate: `{"conf": 0.95, "band": "loglog"}`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KmOptions {
    /// Two-sided confidence level of the bounds.
    pub conf: f64,
    /// Form of the bounds.
    pub band: Band,
}

impl Default for KmOptions {
    fn default() -> Self {
        KmOptions {
            conf: 0.95,
            band: Band::LogLog,
        }
    }
}

impl KmOptions {
    /// Parses the options JSON text.
    pub fn parse(text: &str) -> LifeResult<Self> {
        let value: serde_json::Value = serde_json::from_str(text).map_err(|e| {
            LifeError::BadOptions(format!(
                "are not valid JSON ({e}); expected an object such as {{\"conf\":0.9}}"
            ))
        })?;
        let map = value.as_object().ok_or_else(|| {
            LifeError::BadOptions("must be a JSON object such as {\"conf\":0.9}".into())
        })?;
        let mut out = KmOptions::default();
        for (key, v) in map {
            match key.as_str() {
                "conf" => {
                    out.conf = v.as_f64().filter(|c| *c > 0.0 && *c < 1.0).ok_or_else(|| {
                        LifeError::BadOptions(format!("conf must be in (0, 1), got {v}"))
                    })?
                }
                "band" => {
                    out.band = match v.as_str() {
                        Some("loglog") => Band::LogLog,
                        Some("linear") => Band::Linear,
                        _ => {
                            return Err(LifeError::BadOptions(format!(
                                "name an unknown band {v}; accepted: 'loglog', 'linear'"
                            )))
                        }
                    }
                }
                other => {
                    return Err(LifeError::BadOptions(format!(
                        "have an unknown key '{other}'; accepted keys: 'conf', 'band'"
                    )))
                }
            }
        }
        Ok(out)
    }
}
