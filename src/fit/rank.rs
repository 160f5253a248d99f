//! Rank regression: median-rank plotting positions and a least-squares line
//! on a family's probability plot.
//!
//! Failures are ranked among all units in age order; suspensions push the
//! later failures' order numbers up by Johnson's adjusted-rank method
//! (L. G. Johnson, *The Statistical Treatment of Fatigue Experiments*,
//! Elsevier, 1964). An order number i among n units is turned into an
//! unreliability either by Bernard's approximation (i - 0.3) / (n + 0.4) or
//! exactly, as the median of Beta(i, n - i + 1) (the distribution of the
//! i-th of n uniform order statistics, for real i as well). The plotted
//! points (x(age), y(F)) are fitted by least squares, and the line's
//! intercept and slope give the family's parameters. Knows nothing of SQL.

use crate::dist::Family;
use crate::error::{show_number, LifeError, LifeResult};
use crate::sample::{Kind, Obs};

/// How an order number becomes an unreliability (a plotting position).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Positions {
    /// Bernard's approximation to the median rank: (i - 0.3) / (n + 0.4).
    Bernard,
    /// The exact median rank: the median of Beta(i, n - i + 1).
    Exact,
}

/// One failed unit on the probability plot.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlotPoint {
    /// Age at failure.
    pub age: f64,
    /// (Adjusted) order number of the failure among all units, 1 <= order <= n.
    pub order: f64,
    /// Plotting position: the estimated fraction failed by `age`.
    pub unreliability: f64,
}

/// Which variable the least-squares line is fitted to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Regress {
    /// Minimise vertical distances: y(F) on x(age).
    OnY,
    /// Minimise horizontal distances: x(age) on y(F).
    OnX,
}

/// A rank-regression fit.
#[derive(Debug, Clone, PartialEq)]
pub struct RankFit {
    /// Parameters in the order of the family's [`Family::params`].
    pub params: Vec<f64>,
    /// Pearson correlation coefficient of the plotted points.
    pub correlation: f64,
    /// Number of plotted points (failed units).
    pub points: usize,
}

fn kind_phrase(o: &Obs) -> String {
    match o.kind() {
        Kind::LeftCensored => format!(
            "a left-censored life (failed before age {})",
            show_number(o.latest)
        ),
        Kind::Interval => format!(
            "an interval-censored life (failed between ages {} and {})",
            show_number(o.earliest),
            show_number(o.latest)
        ),
        Kind::Failure | Kind::Suspension => format!(
            "a life that entered observation at age {} (left truncation)",
            show_number(o.entry)
        ),
    }
}

/// Number of units an observation stands for, checked to be a whole number >= 1.
pub(crate) fn unit_count(o: &Obs) -> LifeResult<f64> {
    let c = o.count;
    if c.is_finite() && c >= 1.0 && c.fract() == 0.0 {
        Ok(c)
    } else {
        Err(LifeError::bad(
            "count",
            "must be a whole number >= 1",
            show_number(c),
        ))
    }
}

/// Most failed units that plotting positions (and rank regression) expand.
pub const MAX_PLOTTED_FAILURES: f64 = 10_000_000.0;

/// Median-rank plotting positions of every failed unit, in age order.
///
/// Accepts exact failures and suspensions observed from new, each standing
/// for `count` units. Units are ranked by age; at equal ages failures come
/// before suspensions (a unit suspended at the age of a failure is taken to
/// have outlived it). Order numbers follow Johnson's method: for each failed
/// unit, order = previous order + (n + 1 - previous order) / (1 + reverse
/// rank), where the reverse rank is the number of units from this one to the
/// last, itself included; without suspensions the orders are 1, 2, ..., n.
pub fn plotting_positions(obs: &[Obs], positions: Positions) -> LifeResult<Vec<PlotPoint>> {
    // (age, failed, count), checked.
    let mut units: Vec<(f64, bool, f64)> = Vec::with_capacity(obs.len());
    for o in obs {
        let exact = matches!(o.kind(), Kind::Failure | Kind::Suspension);
        if !exact || o.entry != 0.0 {
            return Err(LifeError::NotEstimable(format!(
                "median-rank plotting positions need exact failure ages and suspensions \
                 of units observed from new; got {}",
                kind_phrase(o)
            )));
        }
        units.push((o.earliest, o.failed(), unit_count(o)?));
    }
    // Failures first at equal ages; stable, so the result does not depend on
    // the order the caller's groups arrive in.
    units.sort_by(|a, b| a.0.total_cmp(&b.0).then(b.1.cmp(&a.1)));
    let n: f64 = units.iter().map(|u| u.2).sum();
    // One point per failed unit: refuse sizes that would exhaust memory
    // (a hostile count of 1e12 would otherwise take the host down).
    let failed_units: f64 = units.iter().filter(|u| u.1).map(|u| u.2).sum();
    if failed_units > MAX_PLOTTED_FAILURES {
        return Err(LifeError::NotEstimable(format!(
            "plotting positions give one point per failed unit; {} failures \
             is more than the {MAX_PLOTTED_FAILURES} this extension plots",
            show_number(failed_units)
        )));
    }

    let mut out = Vec::new();
    let mut before = 0.0; // units ranked so far
    let mut order = 0.0;
    for &(age, failed, count) in &units {
        if !failed {
            before += count;
            continue;
        }
        for _ in 0..count as u64 {
            let reverse_rank = n - before;
            order += (n + 1.0 - order) / (1.0 + reverse_rank);
            before += 1.0;
            let unreliability = match positions {
                Positions::Bernard => (order - 0.3) / (n + 0.4),
                Positions::Exact => median_rank(order, n)?,
            };
            out.push(PlotPoint {
                age,
                order,
                unreliability,
            });
        }
    }
    Ok(out)
}

/// Exact median rank of order number `order` (real, 1 <= order <= n) among
/// `n` units: the median of Beta(order, n - order + 1).
pub fn median_rank(order: f64, n: f64) -> LifeResult<f64> {
    if !(order.is_finite() && n.is_finite() && order >= 1.0 && order <= n) {
        return Err(LifeError::BadArgument {
            arg: "order",
            expected: "must lie between 1 and the number of units",
            got: format!("{} with {} units", show_number(order), show_number(n)),
        });
    }
    beta_median(order, n - order + 1.0)
}

// ---------------------------------------------------------------------------
// The median of Beta(a, b), a, b >= 1.
//
// Hand-written because statrs 0.18 is not accurate enough here (measured
// against 50-digit mpmath and scipy.special.betaincinv): its inverse
// `inv_beta_reg(a, b, 0.5)` is off by 1.2e-12 relative at n = 1000, 3.5e-11 at
// n = 10 000, 4.4e-10 at n = 100 000 and 1e-4 at n = 1 000 000 (i = 2), and
// Newton steps on `checked_beta_reg` do not help, because that function is
// itself the limit: it forms ln Γ(a+b) - ln Γ(a) - ln Γ(b) + a ln x +
// b ln(1-x), a difference of numbers of size n ln n, and stops its continued
// fraction after 140 terms where large a and b need thousands. Below, the
// same quantity is formed from Stirling's series so that the large terms
// cancel algebraically (as in DiDonato & Morris, ACM TOMS 18, 1992;
// citation from memory), the continued fraction runs to convergence, and
// Halley steps inside a bracket find the median. Measured after the change:
// within 8e-15 relative of 50-digit mpmath (n <= 1000, whole and real
// orders) and of scipy up to n = 1 000 000; about 2 us per median rank at
// n = 1000 and 30 us at n = 1 000 000 (the continued fraction needs about
// sqrt(n) terms).
// ---------------------------------------------------------------------------

const LN_SQRT_2PI: f64 = 0.918_938_533_204_672_8;

/// δ(z) = ln Γ(z) - [(z - 1/2) ln z - z + ln √(2π)], the remainder of
/// Stirling's formula.
fn stirling_remainder(z: f64) -> f64 {
    if z >= 10.0 {
        // Stirling's series B_2k / (2k (2k-1) z^(2k-1)); the first omitted
        // term is below 2e-18 at z = 10.
        let w = 1.0 / (z * z);
        let s = 1.0 / 12.0
            + w * (-1.0 / 360.0
                + w * (1.0 / 1260.0
                    + w * (-1.0 / 1680.0
                        + w * (1.0 / 1188.0
                            + w * (-691.0 / 360_360.0
                                + w * (1.0 / 156.0 + w * (-3617.0 / 122_400.0)))))));
        s / z
    } else {
        // Shift up with Γ(z + k) = z (z+1) ... (z+k-1) Γ(z) rather than take
        // statrs' ln_gamma(z) minus Stirling's formula: ln_gamma is off by up
        // to 2e-14 absolute near z = 10 (measured against mpmath), which cost
        // 3e-14 relative in median ranks; the shifted form keeps them within
        // 8e-15.
        let k = (10.0 - z).ceil();
        let w = z + k;
        let mut product = 1.0;
        let mut j = 0.0;
        while j < k {
            product *= z + j;
            j += 1.0;
        }
        stirling_remainder(w) + (w - 0.5) * w.ln() - (z - 0.5) * z.ln() - k - product.ln()
    }
}

/// ln(1 + u) - u without cancellation for small u.
fn ln1p_minus(u: f64) -> f64 {
    if u.abs() < 0.1 {
        // -u^2/2 + u^3/3 - ...; 15 terms reach 1e-17 relative at |u| = 0.1.
        let mut term = u;
        let mut sum = 0.0;
        for k in 2..=18 {
            term *= -u;
            sum += term / k as f64;
        }
        sum
    } else {
        u.ln_1p() - u
    }
}

/// ln of x^a (1-x)^b / B(a, b), accurate for large a and b.
fn ln_beta_kernel(a: f64, b: f64, x: f64) -> f64 {
    let c = a + b;
    // a ln(x c / a) + b ln((1 - x) c / b) with t = x c - a; the linear terms
    // a (t/a) and b (-t/b) cancel exactly.
    let t = x.mul_add(c, -a);
    let main = a * ln1p_minus(t / a) + b * ln1p_minus(-t / b);
    main + 0.5 * (a * b / c).ln() - LN_SQRT_2PI + stirling_remainder(c)
        - stirling_remainder(a)
        - stirling_remainder(b)
}

/// Continued fraction for I_x(a, b) = kernel * cf / a (modified Lentz).
fn beta_continued_fraction(a: f64, b: f64, x: f64) -> LifeResult<f64> {
    const TINY: f64 = 1e-300;
    // Terms needed grow like the square root of a and b; this bound is far
    // above what a, b up to 1e12 need.
    const MAX_TERMS: u32 = 5_000_000;
    let fix = |v: f64| if v.abs() < TINY { TINY } else { v };
    let mut c = 1.0;
    let mut d = 1.0 / fix(1.0 - (a + b) * x / (a + 1.0));
    let mut h = d;
    for m in 1..=MAX_TERMS {
        let m = f64::from(m);
        let m2 = 2.0 * m;
        let even = m * (b - m) * x / ((a + m2 - 1.0) * (a + m2));
        d = 1.0 / fix(1.0 + even * d);
        c = fix(1.0 + even / c);
        h *= d * c;
        let odd = -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1.0));
        d = 1.0 / fix(1.0 + odd * d);
        c = fix(1.0 + odd / c);
        let step = d * c;
        h *= step;
        if (step - 1.0).abs() <= f64::EPSILON {
            return Ok(h);
        }
    }
    Err(LifeError::NoConvergence(format!(
        "the median rank of Beta({}, {}) did not converge",
        show_number(a),
        show_number(b)
    )))
}

/// I_x(a, b) - 1/2 and ln of x^a (1-x)^b / B(a, b).
fn beta_excess(a: f64, b: f64, x: f64) -> LifeResult<(f64, f64)> {
    let ln_k = ln_beta_kernel(a, b, x);
    let k = ln_k.exp();
    let excess = if x < (a + 1.0) / (a + b + 2.0) {
        k * beta_continued_fraction(a, b, x)? / a - 0.5
    } else {
        0.5 - k * beta_continued_fraction(b, a, 1.0 - x)? / b
    };
    Ok((excess, ln_k))
}

/// Median of Beta(a, b) for a, b >= 1.
fn beta_median(a: f64, b: f64) -> LifeResult<f64> {
    if a == b {
        return Ok(0.5);
    }
    if a == 1.0 {
        // I_x(1, b) = 1 - (1 - x)^b
        return Ok(-(-std::f64::consts::LN_2 / b).exp_m1());
    }
    if b == 1.0 {
        // I_x(a, 1) = x^a
        return Ok((-std::f64::consts::LN_2 / a).exp());
    }
    if a > b {
        // Solve on the side where the median is below 1/2 and carries its
        // full relative precision.
        return Ok(1.0 - beta_median_solve(b, a)?);
    }
    beta_median_solve(a, b)
}

/// Median of Beta(a, b) by safeguarded Halley steps; 1 <= a < b, so the
/// median lies below 1/2.
fn beta_median_solve(a: f64, b: f64) -> LifeResult<f64> {
    // Start: (a - 1/3) / (a + b - 2/3) (J. Kerman, a closed-form
    // approximation for the median of the beta distribution, 2011; citation
    // from memory). Measured against scipy's betaincinv: at most 3.8% off
    // for a, b >= 1, 2e-8 at a = 1000.
    let mut x = (a - 1.0 / 3.0) / (a + b - 2.0 / 3.0);
    let (mut lo, mut hi) = (0.0_f64, 0.5_f64);
    let mut last_g = f64::INFINITY;
    for _ in 0..200 {
        let (g, ln_k) = beta_excess(a, b, x)?;
        if g == 0.0 {
            return Ok(x);
        }
        if g < 0.0 {
            lo = lo.max(x);
        } else {
            hi = hi.min(x);
        }
        // density f = kernel / (x (1 - x)); f'/f = (a-1)/x - (b-1)/(1-x)
        let newton = g * x * (1.0 - x) / ln_k.exp();
        let curv = (a - 1.0) / x - (b - 1.0) / (1.0 - x);
        let halley = newton / (1.0 - 0.5 * newton * curv);
        let step = if halley.is_finite() { halley } else { newton };
        if step.abs() <= 4.0 * f64::EPSILON * x {
            return Ok(x - step);
        }
        let next = x - step;
        // Bisect when the step leaves the bracket or the excess is not at
        // least halving (far in a tail, where the density is tiny).
        x = if next > lo && next < hi && g.abs() <= 0.5 * last_g {
            next
        } else {
            0.5 * (lo + hi)
        };
        last_g = g.abs();
    }
    Err(LifeError::NoConvergence(format!(
        "the median rank of Beta({}, {}) did not converge",
        show_number(a),
        show_number(b)
    )))
}

// ---------------------------------------------------------------------------
// The line.
// ---------------------------------------------------------------------------

/// Least-squares line through probability-plot points; see [`RankFit`].
///
/// Needs a family with a straight-line plot, at least 2 failures at 2 or
/// more distinct ages (1 for a family whose line passes through the origin).
pub fn rank_regression(
    family: &Family,
    obs: &[Obs],
    positions: Positions,
    regress: Regress,
) -> LifeResult<RankFit> {
    let Some(lin) = family.linear.as_ref() else {
        return Err(LifeError::NotEstimable(format!(
            "rank regression needs a straight-line probability plot; the {} family has none",
            family.name
        )));
    };
    let pts = plotting_positions(obs, positions)?;
    let failures = pts.len();
    let distinct =
        pts.windows(2).filter(|w| w[0].age != w[1].age).count() + usize::from(failures > 0);
    let need = if lin.through_origin { 1 } else { 2 };
    if failures < need || distinct < need {
        return Err(LifeError::NotEstimable(format!(
            "rank regression on the {} probability plot needs at least {need} failure{s} at \
             {need} or more distinct age{s}; got {failures} failure{fs} at {distinct} distinct \
             age{ds}",
            family.name,
            s = if need == 1 { "" } else { "s" },
            fs = if failures == 1 { "" } else { "s" },
            ds = if distinct == 1 { "" } else { "s" },
        )));
    }
    let mut xs = Vec::with_capacity(failures);
    let mut ys = Vec::with_capacity(failures);
    for p in &pts {
        let (x, y) = ((lin.x)(p.age), (lin.y)(p.unreliability));
        if !x.is_finite() {
            return Err(LifeError::NotEstimable(format!(
                "the failure age {} has no place on the {} probability plot",
                show_number(p.age),
                family.name
            )));
        }
        if !y.is_finite() {
            return Err(LifeError::NotEstimable(format!(
                "the plotting position {} (failure at age {}) has no place on the {} \
                 probability plot",
                show_number(p.unreliability),
                show_number(p.age),
                family.name
            )));
        }
        xs.push(x);
        ys.push(y);
    }

    let m = failures as f64;
    let (mx, my) = (xs.iter().sum::<f64>() / m, ys.iter().sum::<f64>() / m);
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for (&x, &y) in xs.iter().zip(&ys) {
        let (dx, dy) = (x - mx, y - my);
        sxx += dx * dx;
        syy += dy * dy;
        sxy += dx * dy;
    }
    let correlation = if sxx > 0.0 && syy > 0.0 {
        sxy / (sxx * syy).sqrt()
    } else {
        // One point, or all points on a level or vertical line (possible
        // only through the origin with a single failure age).
        f64::NAN
    };

    let (intercept, slope) = if lin.through_origin {
        let (mut xx, mut yy, mut xy) = (0.0, 0.0, 0.0);
        for (&x, &y) in xs.iter().zip(&ys) {
            xx += x * x;
            yy += y * y;
            xy += x * y;
        }
        match regress {
            Regress::OnY => (0.0, xy / xx),
            Regress::OnX => (0.0, yy / xy),
        }
    } else {
        match regress {
            Regress::OnY => {
                let slope = sxy / sxx;
                (my - slope * mx, slope)
            }
            Regress::OnX => {
                // x = c + d y  =>  y = -c/d + x/d
                let d = sxy / syy;
                let c = mx - d * my;
                (-c / d, 1.0 / d)
            }
        }
    };
    let params = (lin.params)(intercept, slope)
        .filter(|p| p.iter().all(|v| v.is_finite()))
        .ok_or_else(|| {
            LifeError::NotEstimable(format!(
                "the probability-plot line (intercept {}, slope {}) gives no valid {} model; \
                 the failures' plotting positions do not rise with age",
                show_number(intercept),
                show_number(slope),
                family.name
            ))
        })?;
    Ok(RankFit {
        params,
        correlation,
        points: failures,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dist::{weibull, Linearisation, ParamInfo, ParamKind};

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

    #[test]
    fn orders_without_suspensions_are_one_to_n() {
        let obs = [fail(10.0, 1.0), fail(20.0, 2.0), fail(30.0, 1.0)];
        let p = plotting_positions(&obs, Positions::Bernard).unwrap();
        let orders: Vec<f64> = p.iter().map(|q| q.order).collect();
        assert_eq!(orders, vec![1.0, 2.0, 3.0, 4.0]);
        // Bernard: (i - 0.3) / 4.4
        assert!(close(p[0].unreliability, 0.7 / 4.4, 1e-15));
        assert!(close(p[3].unreliability, 3.7 / 4.4, 1e-15));
        assert_eq!(p[1].age, 20.0);
        assert_eq!(p[2].age, 20.0);
    }

    #[test]
    fn johnson_adjusted_orders_by_hand() {
        // Units in age order: F(10) S(15) F(20) S(25) F(30); n = 5.
        // F(10): 0 + 6/(1+5) = 1
        // F(20): reverse rank 3: 1 + (6-1)/(1+3) = 2.25
        // F(30): reverse rank 1: 2.25 + (6-2.25)/(1+1) = 4.125
        let obs = [
            fail(10.0, 1.0),
            susp(15.0, 1.0),
            fail(20.0, 1.0),
            susp(25.0, 1.0),
            fail(30.0, 1.0),
        ];
        let p = plotting_positions(&obs, Positions::Bernard).unwrap();
        let orders: Vec<f64> = p.iter().map(|q| q.order).collect();
        assert_eq!(orders, vec![1.0, 2.25, 4.125]);
        assert!(close(p[2].unreliability, 3.825 / 5.4, 1e-15));
    }

    #[test]
    fn failures_precede_suspensions_at_equal_ages_whatever_the_input_order() {
        // A suspension at 20 outlives the failure at 20: F(20) keeps order 2.
        let a = [
            fail(10.0, 1.0),
            susp(20.0, 1.0),
            fail(20.0, 1.0),
            fail(30.0, 1.0),
        ];
        let p = plotting_positions(&a, Positions::Bernard).unwrap();
        let orders: Vec<f64> = p.iter().map(|q| q.order).collect();
        // F(30): reverse rank 1: 2 + (5 - 2)/2 = 3.5
        assert_eq!(orders, vec![1.0, 2.0, 3.5]);
    }

    #[test]
    fn counts_expand_to_consecutive_units() {
        // 2 suspensions at 5 then 3 failures at 8: n = 5, reverse ranks 3, 2, 1.
        // 0 + 6/4 = 1.5; 1.5 + 4.5/3 = 3; 3 + 3/2 = 4.5
        let obs = [susp(5.0, 2.0), fail(8.0, 3.0)];
        let p = plotting_positions(&obs, Positions::Bernard).unwrap();
        let orders: Vec<f64> = p.iter().map(|q| q.order).collect();
        assert_eq!(orders, vec![1.5, 3.0, 4.5]);
    }

    #[test]
    fn other_kinds_are_refused_with_the_reason() {
        let left = Obs {
            earliest: 0.0,
            latest: 5.0,
            entry: 0.0,
            count: 1.0,
        };
        let e = plotting_positions(&[fail(1.0, 1.0), left], Positions::Exact).unwrap_err();
        assert!(matches!(e, LifeError::NotEstimable(_)));
        assert!(e.to_string().contains("left-censored"), "{e}");
        assert!(e.to_string().contains("before age 5"), "{e}");
        let late = Obs {
            entry: 2.0,
            ..fail(7.0, 1.0)
        };
        let e = plotting_positions(&[late], Positions::Exact).unwrap_err();
        assert!(
            e.to_string().contains("entered observation at age 2"),
            "{e}"
        );
        let inter = Obs {
            earliest: 3.0,
            latest: 4.0,
            entry: 0.0,
            count: 1.0,
        };
        let e = plotting_positions(&[inter], Positions::Bernard).unwrap_err();
        assert!(e.to_string().contains("between ages 3 and 4"), "{e}");
        let e = plotting_positions(&[fail(1.0, 1.5)], Positions::Bernard).unwrap_err();
        assert_eq!(e.to_string(), "count must be a whole number >= 1, got 1.5");
    }

    #[test]
    fn exact_median_ranks_closed_forms() {
        // Beta(1, n): 1 - 2^(-1/n); Beta(n, 1): 2^(-1/n); Beta(i, i) = 1/2;
        // Beta(2, 2) on 3 units: 3x^2 - 2x^3 = 1/2 at x = 1/2.
        for n in [1.0, 2.0, 5.0, 1e3, 1e6] {
            let first = median_rank(1.0, n).unwrap();
            // The plain form 1 - 2^(-1/n) cancels for large n (about 1e-11
            // relative at n = 1e6), hence the looser tolerance.
            assert!(close(first, 1.0 - 0.5f64.powf(1.0 / n), 1e-10));
            assert!(close(
                median_rank(n, n).unwrap(),
                0.5f64.powf(1.0 / n),
                1e-15
            ));
        }
        assert_eq!(median_rank(2.0, 3.0).unwrap(), 0.5);
        // Order 2 of 4 units, Beta(2, 3): I_x = P(Bin(4, x) >= 2)
        // = 1 - (1 - x)^3 (1 + 3x), which must be 1/2 at the median.
        let x = median_rank(2.0, 4.0).unwrap();
        let cdf = 1.0 - (1.0 - x).powi(3) * (1.0 + 3.0 * x);
        assert!((cdf - 0.5).abs() < 1e-15, "{cdf}");
        assert!(median_rank(0.5, 3.0).is_err());
        assert!(median_rank(4.0, 3.0).is_err());
    }

    #[test]
    fn the_general_solver_reproduces_closed_forms_at_large_n() {
        // Bypass the closed-form shortcuts: Beta(1, b) has median
        // -expm1(-ln2 / b); the solver must find it from the series and the
        // continued fraction.
        for b in [3.0, 50.0, 1e4, 1e6] {
            let exact = -(-std::f64::consts::LN_2 / b).exp_m1();
            let got = beta_median_solve(1.0, b).unwrap();
            assert!(close(got, exact, 2e-14), "b = {b}: {got} vs {exact}");
        }
        // Symmetry: the median of Beta(a, b) is 1 - median of Beta(b, a).
        let m = beta_median(7.5, 2000.0).unwrap();
        let n = beta_median(2000.0, 7.5).unwrap();
        assert!(close(m + n, 1.0, 1e-15));
        // The excess I_x(a, b) - 1/2 changes sign within 4 units in the last
        // place of the median found.
        for (a, b) in [(1.5, 2.5), (3.0, 7.0), (250.25, 400.0), (4e5, 6e5 + 1.0)] {
            let x = beta_median_solve(a, b).unwrap();
            let ulp = f64::EPSILON * x;
            let (below, _) = beta_excess(a, b, x - 4.0 * ulp).unwrap();
            let (above, _) = beta_excess(a, b, x + 4.0 * ulp).unwrap();
            assert!(
                below <= 0.0 && above >= 0.0 && above > below,
                "Beta({a}, {b}): {below} {above} at {x}"
            );
        }
    }

    #[test]
    fn stirling_remainder_is_continuous_at_the_switch() {
        // Γ(z + 1) = z Γ(z) gives δ(z) - δ(z + 1) = (z + 1/2) ln(1 + 1/z) - 1;
        // across z = 10 it links the direct difference to the series.
        for z in [9.0, 9.5, 9.999_999_999, 1.0, 2.5, 10.0, 40.0] {
            let lhs = stirling_remainder(z) - stirling_remainder(z + 1.0);
            let rhs = (z + 0.5) * (1.0 / z).ln_1p() - 1.0;
            assert!((lhs - rhs).abs() < 5e-14, "z = {z}: {lhs} vs {rhs}");
        }
        // δ(1) = 1 - ln √(2π), since Γ(1) = 1.
        assert!((stirling_remainder(1.0) - (1.0 - LN_SQRT_2PI)).abs() < 1e-15);
    }

    #[test]
    fn weibull_line_by_hand() {
        // Four failures with Bernard positions lying exactly on the line of a
        // Weibull with shape 2 and scale 100: age = 100 (-ln(1 - F))^(1/2).
        let n = 4.0;
        let ages: Vec<f64> = (1..=4)
            .map(|i| {
                let f = (f64::from(i) - 0.3) / (n + 0.4);
                100.0 * (-(-f).ln_1p()).sqrt()
            })
            .collect();
        let obs: Vec<Obs> = ages.iter().map(|&a| fail(a, 1.0)).collect();
        for r in [Regress::OnY, Regress::OnX] {
            let fit = rank_regression(&weibull::FAMILY, &obs, Positions::Bernard, r).unwrap();
            assert!(close(fit.params[0], 2.0, 1e-13), "{:?}", fit.params);
            assert!(close(fit.params[1], 100.0, 1e-13), "{:?}", fit.params);
            assert!(close(fit.correlation, 1.0, 1e-14));
            assert_eq!(fit.points, 4);
        }
    }

    #[test]
    fn regression_on_x_and_on_y_by_hand() {
        // A plot with x = age - 1 and y = F, so the points are the Bernard
        // positions themselves and the sums can be written out by hand.
        static TOY: Family = Family {
            name: "toy",
            title: "test family with plot axes x = age, y = F",
            params: &[],
            build: |_| unreachable!(),
            start: |_| vec![],
            pinned: 0,
            pin_quantile: |_, _, _| None,
            linear: Some(Linearisation {
                x: |t| t - 1.0,
                y: |f| f,
                y_inv: |y| y,
                through_origin: false,
                params: |a, b| Some(vec![a, b]),
            }),
        };
        let obs = [fail(1.0, 1.0), fail(2.0, 1.0), fail(3.0, 1.0)];
        let fy = rank_regression(&TOY, &obs, Positions::Bernard, Regress::OnY).unwrap();
        // y_i = (i - 0.3)/3.4 on x_i = i - 1: a perfect line of slope 1/3.4.
        assert!(close(fy.params[1], 1.0 / 3.4, 1e-14));
        assert!(close(fy.params[0], 0.7 / 3.4, 1e-14));
        let fx = rank_regression(&TOY, &obs, Positions::Bernard, Regress::OnX).unwrap();
        assert!(close(fx.params[1], 1.0 / 3.4, 1e-14));
        assert!(close(fx.correlation, 1.0, 1e-15));

        // Now a scattered set: two failures at age 1 (x = 0), one at 3 (x = 2),
        // suspension-free, n = 3: y = 0.7/3.4, 1.7/3.4, 2.7/3.4 at x = 0, 0, 2.
        let obs = [fail(1.0, 2.0), fail(3.0, 1.0)];
        let (y1, y2, y3): (f64, f64, f64) = (0.7 / 3.4, 1.7 / 3.4, 2.7 / 3.4);
        let (mx, my) = (2.0 / 3.0, (y1 + y2 + y3) / 3.0);
        let sxx = 2.0 * mx * mx + (2.0 - mx) * (2.0 - mx);
        let sxy = -mx * (y1 - my) - mx * (y2 - my) + (2.0 - mx) * (y3 - my);
        let syy = (y1 - my).powi(2) + (y2 - my).powi(2) + (y3 - my).powi(2);
        let fy = rank_regression(&TOY, &obs, Positions::Bernard, Regress::OnY).unwrap();
        assert!(close(fy.params[1], sxy / sxx, 1e-14));
        assert!(close(fy.params[0], my - sxy / sxx * mx, 1e-14));
        let fx = rank_regression(&TOY, &obs, Positions::Bernard, Regress::OnX).unwrap();
        assert!(close(fx.params[1], syy / sxy, 1e-14));
        assert!(close(fx.params[0], my - syy / sxy * mx, 1e-14));
        assert!(close(fx.correlation, sxy / (sxx * syy).sqrt(), 1e-14));
        // On x the slope is steeper than on y unless r = 1.
        assert!(fx.params[1] > fy.params[1]);
    }

    #[test]
    fn through_origin_line_by_hand() {
        // Exponential-like plot: x = t, y = -ln(1 - F), line y = t / mean.
        static ORIGIN: Family = Family {
            name: "origin",
            title: "test family with a line through the origin",
            params: &[ParamInfo {
                name: "mean",
                meaning: "mean life",
                kind: ParamKind::Positive,
            }],
            build: |_| unreachable!(),
            start: |_| vec![],
            pinned: 0,
            pin_quantile: |_, _, _| None,
            linear: Some(Linearisation {
                x: |t| t,
                y: |f| -(-f).ln_1p(),
                y_inv: |y| -(-y).exp_m1(),
                through_origin: true,
                params: |_, b| (b > 0.0).then(|| vec![1.0 / b]),
            }),
        };
        // One failure is enough: y = b x through (x1, y1) gives b = y1 / x1.
        let one = [fail(50.0, 1.0), susp(80.0, 3.0)];
        let fit = rank_regression(&ORIGIN, &one, Positions::Bernard, Regress::OnY).unwrap();
        let y1 = -(-(0.7f64 / 4.4)).ln_1p();
        assert!(close(fit.params[0], 50.0 / y1, 1e-14));
        assert!(fit.correlation.is_nan());
        // Two failures: on y b = Σxy/Σx², on x b = Σy²/Σxy.
        let two = [fail(10.0, 1.0), fail(30.0, 1.0)];
        let (ya, yb) = (-(-(0.7f64 / 2.4)).ln_1p(), -(-(1.7f64 / 2.4)).ln_1p());
        let (xx, yy, xy) = (1000.0, ya * ya + yb * yb, 10.0 * ya + 30.0 * yb);
        let fy = rank_regression(&ORIGIN, &two, Positions::Bernard, Regress::OnY).unwrap();
        assert!(close(fy.params[0], xx / xy, 1e-14));
        let fx = rank_regression(&ORIGIN, &two, Positions::Bernard, Regress::OnX).unwrap();
        assert!(close(fx.params[0], xy / yy, 1e-14));
        assert!(close(fx.correlation, 1.0, 1e-14)); // two points: |r| = 1
        assert_eq!(
            rank_regression(&ORIGIN, &[susp(5.0, 2.0)], Positions::Exact, Regress::OnY)
                .unwrap_err()
                .to_string(),
            "rank regression on the origin probability plot needs at least 1 failure at 1 or \
             more distinct age; got 0 failures at 0 distinct ages"
        );
    }

    #[test]
    fn too_few_failures_or_ages_name_the_counts() {
        let w = &weibull::FAMILY;
        let e = rank_regression(
            w,
            &[fail(5.0, 3.0), susp(9.0, 2.0)],
            Positions::Exact,
            Regress::OnY,
        )
        .unwrap_err();
        assert_eq!(
            e.to_string(),
            "rank regression on the weibull probability plot needs at least 2 failures at 2 or \
             more distinct ages; got 3 failures at 1 distinct age"
        );
        let e = rank_regression(w, &[fail(5.0, 1.0)], Positions::Exact, Regress::OnX).unwrap_err();
        assert!(
            e.to_string().contains("got 1 failure at 1 distinct age"),
            "{e}"
        );
    }

    #[test]
    fn families_without_a_plot_and_falling_lines_are_refused() {
        static CURVED: Family = Family {
            name: "curved",
            title: "test family without a straight-line plot",
            params: &[],
            build: |_| unreachable!(),
            start: |_| vec![],
            pinned: 0,
            pin_quantile: |_, _, _| None,
            linear: None,
        };
        let obs = [fail(1.0, 1.0), fail(2.0, 1.0)];
        let e = rank_regression(&CURVED, &obs, Positions::Exact, Regress::OnY).unwrap_err();
        assert_eq!(
            e.to_string(),
            "rank regression needs a straight-line probability plot; the curved family has none"
        );
        static FALLING: Family = Family {
            name: "falling",
            title: "test family whose plot runs backwards",
            params: &[],
            build: |_| unreachable!(),
            start: |_| vec![],
            pinned: 0,
            pin_quantile: |_, _, _| None,
            linear: Some(Linearisation {
                x: |t| -t,
                y: |f| f,
                y_inv: |y| y,
                through_origin: false,
                params: |a, b| (b > 0.0).then(|| vec![a, b]),
            }),
        };
        let e = rank_regression(&FALLING, &obs, Positions::Bernard, Regress::OnY).unwrap_err();
        assert!(matches!(e, LifeError::NotEstimable(_)));
        assert!(
            e.to_string().contains("gives no valid falling model"),
            "{e}"
        );
    }
}
