//! The renewal function: expected failures in a position whose units are
//! replaced at failure by new ones.
//!
//! M(t) = expected number of failures in (0, t] when each failed unit is
//! replaced at once by a new unit with the same life distribution F. It
//! solves the renewal equation
//!
//! ```text
//! M(t) = F(t) + integral_[0,t] M(t - x) dF(x)
//! ```
//!
//! and for large t approaches t/mean + (variance/mean^2 - 1)/2. Block
//! replacement ([`super::policy`]) reads it.
//!
//! # Method
//!
//! Hand-written, because none of the project's crates solves integral
//! equations (statrs evaluates distributions; argmin optimises and finds
//! roots). On a uniform grid t_i = i h the integral is split at the grid
//! points and, on each piece, M(t_i - x) is replaced by the mean of its two
//! end values while dF is taken exactly from the model (a Riemann-Stieltjes
//! sum with the trapezoid rule in M):
//!
//! ```text
//! M_i = F_i + p0 M_i + sum_{j=1..i} (F_j - F_{j-1}) (M_{i-j} + M_{i-j+1}) / 2
//! ```
//!
//! with p0 = F(0) (a model may put mass at age 0, e.g. the normal) and
//! M_0 = p0 / (1 - p0). Solving for M_i is one dot product per grid point,
//! so a sweep costs O(n m) for n grid points and m points under the support
//! of F (masses beyond the age where R < 1e-17 are dropped).
//!
//! The error of one sweep is a power series in h whose leading exponents
//! are 2 (smooth parts) and 1 + beta, 2 + beta, 1 + 2 beta, where beta is
//! the local power of F at the start of its support (F(s0 + u) ~ u^beta;
//! beta is the Weibull or gamma shape, 1 where the density starts positive):
//! a density singular at the origin leaves terms that plain extrapolation
//! would not remove (measured: shape 0.8 converges like h^1.8). So the
//! sweep runs on grids n0, 2 n0, 4 n0, ... and two rounds of Richardson
//! extrapolation remove the two leading exponents, with beta read off the
//! model itself (log2 of F(s0 + 2e)/F(s0 + e) for a tiny e). The grid is
//! refined until two successive extrapolated values agree to 1e-8 relative
//! (at least four grids). The first grid has 8 steps per length scale of the
//! distribution (the smaller of its interquartile range and its median above
//! the start of support), at least 16.
//!
//! Measured (tests/reference_policy.rs, against the numpy convolution of
//! `tests/reference/make_policy_refs.py` and closed forms): about 1e-9
//! relative or better for Weibull shapes 0.8 to 3, gamma, lognormal,
//! log-logistic, normal and 3-parameter Weibull (shape 1.5) models.
//!
//! Limits: the work of one solve is capped (about a second); an age whose
//! grid would need more than 2^21 steps (about a million times the spread
//! of the lives), or whose solve does not reach 1e-6 within the cap, is an
//! error, not a rough number. The slowest case is a density that is
//! infinite at a location above zero (3-parameter Weibull with shape < 1):
//! the singularity cannot sit on every grid, extrapolation removes little,
//! and ages beyond a few scales are refused.

use crate::dist::LifeDistribution;
use crate::error::{show_number, LifeError, LifeResult};

/// Stop refining when two successive extrapolated values agree to this
/// (relative); the value returned is then better still (measured ~1e-9).
const TOLERANCE: f64 = 1e-8;
/// When the work limit stops refinement early, the last value is still
/// returned if its estimated error is below this; otherwise an error.
const ACCEPTABLE: f64 = 1e-6;
/// Grid steps per length scale of the distribution on the first grid.
const STEPS_PER_SCALE: f64 = 8.0;
/// Fewest steps of the first grid between 0 and an age asked for.
const MIN_STEPS: usize = 16;
/// Fewest grids (sweeps): three for two extrapolations, one to compare.
const MIN_LEVELS: usize = 4;
/// Largest grid (points), bounding memory to a few tens of MiB.
const MAX_STEPS: usize = 1 << 21;
/// Largest total number of multiply-adds over all sweeps of one solve
/// (about a second on one core).
const MAX_WORK: f64 = 1.5e9;
/// Probability mass beyond the age where R falls below this is dropped.
const TAIL: f64 = 1e-17;
/// Largest denominator of t/T for which an age shares the grid of a larger
/// age T in [`renewal_curve`].
const MAX_DENOMINATOR: u64 = 64;

/// Expected number of failures in (0, t] of a position whose units are
/// replaced at failure by new ones (the renewal function M(t)).
///
/// `t` must be a finite number >= 0. M(0) = 0 unless the model puts mass at
/// age 0 (then M(0) = F(0) / (1 - F(0))). Relative accuracy about 1e-9
/// (measured); one call costs well under a millisecond for ages up to a few
/// mean lives of a wear-out Weibull and grows with t (see the module notes
/// for the limits).
pub fn renewal_function(d: &dyn LifeDistribution, t: f64) -> LifeResult<f64> {
    Ok(renewal_curve(d, &[t])?[0])
}

/// The renewal function at many ages at once, in the order given.
///
/// Ages that are simple fractions (denominator up to 64) of a larger age in
/// the list share its grid, so an evenly spaced curve costs about as much as
/// its last point; other ages are solved on their own grids.
pub fn renewal_curve(d: &dyn LifeDistribution, ts: &[f64]) -> LifeResult<Vec<f64>> {
    for &t in ts {
        if !(t.is_finite() && t >= 0.0) {
            return Err(LifeError::bad(
                "t",
                "must be a finite number >= 0",
                show_number(t),
            ));
        }
    }
    if ts.is_empty() {
        return Ok(Vec::new());
    }
    let setup = Setup::of(d)?;
    // Ages at which M is zero (no failure possible yet) or known (age 0)
    // need no grid; the others are solved largest first.
    let mut pending: Vec<f64> = ts
        .iter()
        .copied()
        .filter(|&t| t > 0.0 && d.cdf(t) > 0.0)
        .collect();
    pending.sort_by(|a, b| b.total_cmp(a));
    pending.dedup();
    let mut solved: Vec<(f64, f64)> = Vec::with_capacity(pending.len());
    while let Some(&big) = pending.first() {
        let n_base = setup.base_steps(big)?;
        let (n0, members) = share_grid(big, &pending[1..], n_base);
        let values = solve(d, &setup, big, n0, &members)?;
        for (m, v) in members.iter().zip(values) {
            solved.push((m.t, v));
        }
        pending.retain(|t| !members.iter().any(|m| m.t == *t));
    }
    solved.sort_by(|a, b| a.0.total_cmp(&b.0));
    Ok(ts
        .iter()
        .map(|&t| {
            if t == 0.0 {
                setup.m0
            } else {
                solved
                    .binary_search_by(|p| p.0.total_cmp(&t))
                    .map(|k| solved[k].1)
                    .unwrap_or(0.0) // F(t) = 0: no failure possible by t
            }
        })
        .collect())
}

/// What the grid needs to know about a distribution, read once per call.
#[derive(Debug, Clone, Copy)]
struct Setup {
    /// Mass at age 0: p0 = F(0).
    p0: f64,
    /// M(0) = p0 / (1 - p0).
    m0: f64,
    /// A length over which F changes appreciably (None: unknown).
    scale: Option<f64>,
    /// The two leading exponents of the grid error, removed by extrapolation.
    exponents: [f64; 2],
}

impl Setup {
    fn of(d: &dyn LifeDistribution) -> LifeResult<Self> {
        let p0 = d.cdf(0.0);
        if !(0.0..1.0).contains(&p0) {
            return Err(LifeError::NotEstimable(format!(
                "the model gives unreliability {} at age 0, so every unit fails at once \
                 and the expected number of failures is unbounded",
                show_number(p0)
            )));
        }
        let start = d.quantile(0.0);
        let start = if start.is_finite() && start > 0.0 {
            start
        } else {
            0.0
        };
        let (q25, q50, q75) = (d.quantile(0.25), d.quantile(0.5), d.quantile(0.75));
        let scale = [q75 - q25, q50 - start]
            .into_iter()
            .filter(|v| v.is_finite() && *v > 0.0)
            .reduce(f64::min);
        let beta = scale
            .and_then(|s| local_power(d, start, 1e-6 * s))
            .unwrap_or(8.0);
        Ok(Setup {
            p0,
            m0: p0 / (1.0 - p0),
            scale,
            exponents: error_exponents(beta),
        })
    }

    /// Steps of the first grid on [0, t].
    fn base_steps(&self, t: f64) -> LifeResult<usize> {
        let per_scale = match self.scale {
            Some(s) => STEPS_PER_SCALE * t / s,
            None => 0.0,
        };
        let n = per_scale.ceil().max(MIN_STEPS as f64);
        // The finest grid is at least 8 times the first.
        if n.is_nan() || n * 8.0 > MAX_STEPS as f64 {
            return Err(too_long(t, self.scale));
        }
        Ok(n as usize)
    }
}

/// beta in F(s0 + u) - F(s0) ~ c u^beta near the start s0 of the support,
/// clamped to [0.01, 8]; None where F does not rise measurably at `e`.
fn local_power(d: &dyn LifeDistribution, start: f64, e: f64) -> Option<f64> {
    let f0 = d.cdf(start);
    let (a, b) = (d.cdf(start + e) - f0, d.cdf(start + 2.0 * e) - f0);
    let beta = (b / a).log2();
    (a > 0.0 && beta.is_finite()).then(|| beta.clamp(0.01, 8.0))
}

/// The two smallest distinct exponents among 2, 4, 1 + beta, 2 + beta and
/// 1 + 2 beta (exponents closer than 0.05 count as one).
fn error_exponents(beta: f64) -> [f64; 2] {
    let mut all = [2.0, 4.0, 1.0 + beta, 2.0 + beta, 1.0 + 2.0 * beta];
    all.sort_by(f64::total_cmp);
    let mut chosen: Vec<f64> = Vec::with_capacity(2);
    for p in all {
        if chosen.len() < 2 && chosen.iter().all(|q| (p - q).abs() > 0.05) {
            chosen.push(p);
        }
    }
    [chosen[0], chosen[1]]
}

/// The error for an age whose first grid alone would be too fine.
fn too_long(t: f64, scale: Option<f64>) -> LifeError {
    let times = match scale {
        Some(s) => format!(
            " is {} times the spread of the model's lives and",
            compact(t / s)
        ),
        None => String::new(),
    };
    LifeError::NoConvergence(format!(
        "renewal function: age t = {}{} would need a grid of more than {MAX_STEPS} steps",
        show_number(t),
        times
    ))
}

/// The error for a solve stopped by the work limit before 1e-6 accuracy.
fn not_converged(t: f64, steps: usize, change: f64) -> LifeError {
    LifeError::NoConvergence(format!(
        "renewal function at age t = {}: no 1e-6 accuracy within the work limit \
         (relative change {} on the last grid of {steps} steps)",
        show_number(t),
        compact(change)
    ))
}

/// A positive number rounded to three decimals, or in scientific notation
/// outside [1e-3, 1e6).
fn compact(x: f64) -> String {
    if x.is_finite() && (1e-3..1e6).contains(&x) {
        format!("{}", (x * 1e3).round() / 1e3)
    } else {
        format!("{x:.3e}")
    }
}

/// An age solved on a shared grid: grid index `num * (n0 / den)` on the
/// first grid.
#[derive(Debug, Clone, Copy)]
struct Member {
    t: f64,
    num: u64,
    den: u64,
}

impl Member {
    fn index(&self, n0: usize) -> usize {
        self.num as usize * (n0 / self.den as usize)
    }
}

/// The smallest fraction num/den (den <= MAX_DENOMINATOR) equal to `r` to
/// 1e-12 relative (a grid point that close to t changes M by far less than
/// the solver's error).
fn simple_fraction(r: f64) -> Option<(u64, u64)> {
    (1..=MAX_DENOMINATOR).find_map(|den| {
        let x = r * den as f64;
        let num = x.round();
        (num >= 1.0 && (x - num).abs() <= 1e-12 * x).then_some((num as u64, den))
    })
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 {
        a
    } else {
        gcd(b, a % b)
    }
}

/// Chooses the first grid for the largest pending age `big` and the smaller
/// ages that can share it: those at a simple fraction of `big` whose index
/// is at least MIN_STEPS, as long as the common denominator does not push
/// the grid beyond `n_base` rounded up to it (at most doubling it).
fn share_grid(big: f64, others: &[f64], n_base: usize) -> (usize, Vec<Member>) {
    let mut lcm: u64 = 1;
    let mut members = vec![Member {
        t: big,
        num: 1,
        den: 1,
    }];
    for &t in others {
        let Some((num, den)) = simple_fraction(t / big) else {
            continue;
        };
        let next = lcm / gcd(lcm, den) * den;
        if next > n_base as u64 {
            continue;
        }
        let n0 = n_base.div_ceil(next as usize) * next as usize;
        let member = Member { t, num, den };
        if member.index(n0) >= MIN_STEPS && n0 * 8 <= MAX_STEPS {
            lcm = next;
            members.push(member);
        }
    }
    let n0 = n_base.div_ceil(lcm as usize) * lcm as usize;
    (n0, members)
}

/// Solves on grids n0, 2 n0, 4 n0, ... over [0, big] until the extrapolated
/// values at every member age agree between two successive grids.
fn solve(
    d: &dyn LifeDistribution,
    setup: &Setup,
    big: f64,
    n0: usize,
    members: &[Member],
) -> LifeResult<Vec<f64>> {
    let [p1, p2] = setup.exponents;
    let (w1, w2) = (2f64.powf(p1), 2f64.powf(p2));
    // Per level: raw values, once- and twice-extrapolated values.
    let mut raw: Vec<Vec<f64>> = Vec::new();
    let mut once: Vec<Vec<f64>> = Vec::new();
    let mut twice: Vec<Vec<f64>> = Vec::new();
    let mut work_done = 0.0;
    let mut f_grid: Vec<f64> = Vec::new();
    let mut n = n0;
    loop {
        let level = raw.len();
        let sweep = if n <= MAX_STEPS {
            f_grid = refine_cdf(d, big, n, &f_grid)?;
            Some(Sweep::new(d, big, &f_grid, setup.p0))
        } else {
            None
        };
        let Some(sweep) = sweep.filter(|s| work_done + s.work() <= MAX_WORK) else {
            // Out of budget: keep what we have if it is accurate enough.
            let change = worst_change(&twice);
            if level >= MIN_LEVELS && change <= ACCEPTABLE {
                return Ok(twice.last().cloned().unwrap_or_default());
            }
            return Err(not_converged(big, n / 2, change));
        };
        work_done += sweep.work();
        let m = sweep.run(setup.m0);
        raw.push(members.iter().map(|mb| m[mb.index(n0) << level]).collect());
        if level >= 1 {
            once.push(extrapolate(&raw[level], &raw[level - 1], w1));
        }
        if level >= 2 {
            twice.push(extrapolate(&once[level - 1], &once[level - 2], w2));
        }
        if level + 1 >= MIN_LEVELS {
            let change = worst_change(&twice);
            if change.is_nan() {
                return Err(LifeError::NoConvergence(format!(
                    "renewal function at t = {}: the model's unreliability gave no number \
                     on the grid",
                    show_number(big)
                )));
            }
            if change <= TOLERANCE {
                return Ok(twice.last().cloned().unwrap_or_default());
            }
        }
        n *= 2;
    }
}

/// (2^p fine - coarse) / (2^p - 1), elementwise.
fn extrapolate(fine: &[f64], coarse: &[f64], w: f64) -> Vec<f64> {
    fine.iter()
        .zip(coarse)
        .map(|(f, c)| (w * f - c) / (w - 1.0))
        .collect()
}

/// Largest relative change between the last two rows (infinite if fewer).
fn worst_change(rows: &[Vec<f64>]) -> f64 {
    let [.., a, b] = rows else {
        return f64::INFINITY;
    };
    a.iter().zip(b).fold(0.0, |w: f64, (x, y)| {
        let c = (y - x).abs() / y.abs().max(f64::MIN_POSITIVE);
        if c.is_nan() || w.is_nan() {
            f64::NAN
        } else {
            w.max(c)
        }
    })
}

/// F at the n + 1 points of the grid of [0, big] with n steps, reusing the
/// previous grid's values (every second point) when it had n / 2 steps.
fn refine_cdf(
    d: &dyn LifeDistribution,
    big: f64,
    n: usize,
    previous: &[f64],
) -> LifeResult<Vec<f64>> {
    let h = big / n as f64;
    let reuse = previous.len() == n / 2 + 1 && n % 2 == 0;
    let mut f = Vec::with_capacity(n + 1);
    for i in 0..=n {
        let v = if reuse && i % 2 == 0 {
            previous[i / 2]
        } else if i == n {
            d.cdf(big)
        } else {
            d.cdf(i as f64 * h)
        };
        if !(0.0..=1.0).contains(&v) {
            return Err(LifeError::NoConvergence(format!(
                "renewal function: the model's unreliability at age {} is {}, not a probability",
                show_number(i as f64 * h),
                show_number(v)
            )));
        }
        f.push(v);
    }
    Ok(f)
}

/// One sweep of the discretised renewal equation over a grid.
struct Sweep<'a> {
    f: &'a [f64],
    /// Mass at age 0.
    p0: f64,
    /// c_d = (dF_d + dF_{d+1}) / 2 stored reversed: rev[j] = c_{d_hi - j}.
    rev: Vec<f64>,
    /// Smallest and largest d with c_d != 0 (d >= 1).
    d_lo: usize,
    d_hi: usize,
    /// dF_j = F_j - F_{j-1} for j = 1..=n (index j - 1), zero beyond the tail.
    df: Vec<f64>,
}

impl<'a> Sweep<'a> {
    fn new(d: &dyn LifeDistribution, big: f64, f: &'a [f64], p0: f64) -> Self {
        let n = f.len() - 1;
        let h = big / n as f64;
        // First grid index beyond which R < TAIL (binary search; R falls).
        let (mut lo, mut hi) = (0usize, n);
        if d.sf(big) <= TAIL {
            while hi - lo > 1 {
                let mid = (lo + hi) / 2;
                if d.sf(mid as f64 * h) <= TAIL {
                    hi = mid;
                } else {
                    lo = mid;
                }
            }
        }
        let tail = hi;
        let df: Vec<f64> = (1..=n)
            .map(|j| if j <= tail { f[j] - f[j - 1] } else { 0.0 })
            .collect();
        let c = |dd: usize| 0.5 * (df[dd - 1] + df.get(dd).copied().unwrap_or(0.0));
        let d_lo = (1..n).find(|&dd| c(dd) != 0.0).unwrap_or(n);
        let d_hi = (1..n).rev().find(|&dd| c(dd) != 0.0).unwrap_or(0);
        let rev = if d_lo <= d_hi {
            (d_lo..=d_hi).rev().map(c).collect()
        } else {
            Vec::new()
        };
        Sweep {
            f,
            p0,
            rev,
            d_lo,
            d_hi,
            df,
        }
    }

    /// Multiply-adds of one run.
    fn work(&self) -> f64 {
        let n = (self.f.len() - 1) as f64;
        n * (self.rev.len() as f64).min(n).max(1.0)
    }

    /// M at every grid point.
    fn run(&self, m0: f64) -> Vec<f64> {
        let n = self.f.len() - 1;
        let mut m = vec![0.0; n + 1];
        m[0] = m0;
        let denominator = 1.0 - self.p0 - 0.5 * self.df[0];
        for i in 1..=n {
            // sum over k of M_k c_{i-k}, k in [max(1, i - d_hi), i - d_lo]
            let mut s = 0.0;
            if self.d_lo <= self.d_hi && i > self.d_lo {
                let k_lo = i.saturating_sub(self.d_hi).max(1);
                let k_hi = i - self.d_lo;
                let j0 = self.d_hi + k_lo - i;
                s = dot(&m[k_lo..=k_hi], &self.rev[j0..j0 + (k_hi - k_lo + 1)]);
            }
            m[i] = (self.f[i] + 0.5 * m0 * self.df[i - 1] + s) / denominator;
        }
        m
    }
}

/// Dot product in eight independent partial sums (a fixed order, so the
/// result does not depend on the machine; the compiler can vectorise it).
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut acc = [0.0f64; 8];
    let (ca, cb) = (a.chunks_exact(8), b.chunks_exact(8));
    let tail: f64 = ca
        .remainder()
        .iter()
        .zip(cb.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (x, y) in ca.zip(cb) {
        for l in 0..8 {
            acc[l] += x[l] * y[l];
        }
    }
    (acc[0] + acc[4]) + (acc[1] + acc[5]) + (acc[2] + acc[6]) + (acc[3] + acc[7]) + tail
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dist::{exponential::Exponential, gamma::Gamma, weibull::Weibull};

    /// Exponential lives: M(t) = t/theta exactly (a Poisson process of
    /// failures; e.g. any renewal-theory text).
    #[test]
    fn exponential_is_linear() {
        let d = Exponential::new(250.0).unwrap();
        for t in [1.0, 100.0, 250.0, 1000.0, 5000.0] {
            let m = renewal_function(&d, t).unwrap();
            assert!((m / (t / 250.0) - 1.0).abs() < 1e-8, "t {t}: {m}");
        }
    }

    /// Erlang-2 lives (gamma shape 2, scale theta): from the Laplace
    /// transform, M(t) = t/(2 theta) - 1/4 + exp(-2t/theta)/4.
    #[test]
    fn erlang_two_closed_form() {
        let d = Gamma::new(2.0, 3.0).unwrap();
        for t in [0.5f64, 3.0, 10.0, 40.0] {
            let exact = t / 6.0 - 0.25 + (-2.0 * t / 3.0).exp() / 4.0;
            let m = renewal_function(&d, t).unwrap();
            assert!((m / exact - 1.0).abs() < 1e-8, "t {t}: {m} vs {exact}");
        }
    }

    #[test]
    fn curve_matches_single_calls_and_orders() {
        let d = Weibull::new(2.0, 1000.0).unwrap();
        let ts = [1000.0, 250.0, 0.0, 500.0, 333.3, 1000.0, 2000.0];
        let curve = renewal_curve(&d, &ts).unwrap();
        for (t, m) in ts.iter().zip(&curve) {
            let single = renewal_function(&d, *t).unwrap();
            assert!((m - single).abs() <= 1e-8 * single.max(1e-300), "{t}");
        }
        assert_eq!(curve[2], 0.0);
        assert_eq!(curve[0], curve[5]);
        assert!(curve[1] < curve[3] && curve[3] < curve[0] && curve[0] < curve[6]);
    }

    #[test]
    fn bad_ages_are_errors_naming_the_value() {
        let d = Weibull::new(2.0, 1000.0).unwrap();
        for t in [-1.0, f64::NAN, f64::INFINITY] {
            let e = renewal_function(&d, t).unwrap_err().to_string();
            assert!(e.starts_with("t must be a finite number >= 0, got"), "{e}");
        }
        assert!(renewal_curve(&d, &[]).unwrap().is_empty());
    }

    #[test]
    fn far_too_long_is_an_error_not_a_hang() {
        let d = Weibull::new(2.0, 1.0).unwrap();
        let e = renewal_function(&d, 1e12).unwrap_err().to_string();
        assert!(
            e.contains("would need a grid of more than 2097152 steps"),
            "{e}"
        );
    }

    #[test]
    fn exponents() {
        assert_eq!(error_exponents(0.8), [1.8, 2.0]);
        assert_eq!(error_exponents(1.0), [2.0, 3.0]);
        assert_eq!(error_exponents(1.5), [2.0, 2.5]);
        assert_eq!(error_exponents(8.0), [2.0, 4.0]);
        assert_eq!(error_exponents(0.5), [1.5, 2.0]);
    }
}
