//! Maximum likelihood for every family and every kind of censoring.
//!
//! The log-likelihood is written once, from each family's cumulative hazard
//! and log-density: exact failures ln f(t), suspensions ln R(t), left- and
//! interval-censored lives ln(F(b) - F(a)), each conditioned on survival to
//! its entry age. argmin's Nelder-Mead finds the maximum in unconstrained
//! coordinates; a few guarded Newton steps then polish it (see
//! [`polish`]) and the observed information gives the covariance.

use crate::dist::{Family, LifeDistribution, StartSummary};
use crate::error::{LifeError, LifeResult};
use crate::sample::{Kind, Obs};
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentOpt;
use argmin::solver::neldermead::NelderMead;

/// Censored, truncated log-likelihood of merged observations under a distribution.
///
/// Summed with Neumaier's compensation: the optimiser differentiates this
/// sum numerically, and over 1e5 terms plain summation leaves noise of
/// ~1e-9 absolute, which was measured to stall the final Newton steps at
/// ~6e-7 relative error in the parameters; compensated, they reach 1e-10.
pub fn loglik(d: &dyn LifeDistribution, obs: &[Obs]) -> f64 {
    let (mut total, mut carry) = (0.0f64, 0.0f64);
    for o in obs {
        let l = match o.kind() {
            Kind::Failure => d.ln_pdf(o.earliest),
            Kind::Suspension => -d.cum_hazard(o.earliest),
            // ln F(b): failed at some age before b. (For a family with mass
            // below age 0, such as the normal, F(b) includes it.)
            Kind::LeftCensored => (-(-d.cum_hazard(o.latest)).exp_m1()).ln(),
            Kind::Interval => {
                // ln(R(a) - R(b)) = -H(a) + ln(1 - exp(-(H(b) - H(a))))
                let dh = d.cum_hazard_increment(o.earliest, o.latest - o.earliest);
                -d.cum_hazard(o.earliest) + (-(-dh).exp_m1()).ln()
            }
        };
        let entry = if o.entry > 0.0 {
            d.cum_hazard(o.entry)
        } else {
            0.0
        };
        let term = o.count * (l + entry);
        let t = total + term;
        carry += if total.abs() >= term.abs() {
            (total - t) + term
        } else {
            (term - t) + total
        };
        total = t;
    }
    if total.is_finite() {
        total + carry
    } else {
        total
    }
}

/// A rough placement of the ages for start values: failures at their age,
/// censored failures at their interval's midpoint (left-censored at half
/// the bound), suspensions at their age.
pub fn start_summary(obs: &[Obs]) -> StartSummary {
    let (mut w, mut s1, mut s2, mut l1, mut l2, mut wl) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    let mut first_failure = f64::INFINITY;
    for o in obs {
        let t = match o.kind() {
            Kind::Failure | Kind::Suspension => o.earliest,
            Kind::LeftCensored | Kind::Interval => 0.5 * (o.earliest + o.latest),
        };
        if o.failed() {
            first_failure = first_failure.min(o.latest);
        }
        w += o.count;
        s1 += o.count * t;
        s2 += o.count * t * t;
        if t > 0.0 {
            wl += o.count;
            l1 += o.count * t.ln();
            l2 += o.count * t.ln() * t.ln();
        }
    }
    let mean = s1 / w;
    let mean_ln = if wl > 0.0 { l1 / wl } else { 0.0 };
    StartSummary {
        mean,
        sd: (s2 / w - mean * mean).max(0.0).sqrt(),
        mean_ln,
        sd_ln: if wl > 0.0 {
            (l2 / wl - mean_ln * mean_ln).max(0.0).sqrt()
        } else {
            0.0
        },
        first_failure,
    }
}

/// Largest shape parameter the generic search visits (as the Weibull
/// solver's limit): beyond it a distribution is a spike (a spread below
/// 0.1% of the age) and the data cannot tell such shapes apart. A measured
/// need: on data that push the gamma shape towards infinity, each
/// evaluation of its incomplete gamma function costs about 9 sqrt(shape)
/// terms, and the search took 16 to 82 s (fuzzing, release build) before
/// the bound.
pub const MAX_SEARCH_SHAPE: f64 = 1e6;

/// True when a searched parameter named "shape" exceeds `limit`.
fn beyond_search(family: &Family, params: &[f64], free: &[usize], limit: f64) -> bool {
    free.iter()
        .any(|&i| family.params[i].name == "shape" && params[i] > limit)
}

/// A maximum-likelihood estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimate {
    /// Natural parameters in the family's order.
    pub params: Vec<f64>,
    /// Maximised log-likelihood.
    pub loglik: f64,
    /// Covariance of the estimates (inverse observed information); rows and
    /// columns of fixed parameters are zero.
    pub cov: Vec<Vec<f64>>,
}

/// Negative log-likelihood in the unconstrained coordinates of the free parameters.
struct Objective<'a> {
    family: &'a Family,
    obs: &'a [Obs],
    /// Natural parameter values, with the fixed ones in place.
    base: Vec<f64>,
    /// Indices of the free parameters.
    free: Vec<usize>,
}

impl Objective<'_> {
    /// Natural parameters from free coordinates.
    fn natural(&self, x: &[f64]) -> Vec<f64> {
        let mut all = self.family.to_free(&self.base);
        for (slot, &i) in self.free.iter().enumerate() {
            all[i] = x[slot];
        }
        self.family.from_free(&all)
    }

    /// Negative log-likelihood; +infinity where the parameters are invalid,
    /// beyond the searched range, or the data impossible under them.
    fn value(&self, x: &[f64]) -> f64 {
        let params = self.natural(x);
        if beyond_search(self.family, &params, &self.free, MAX_SEARCH_SHAPE) {
            return f64::INFINITY;
        }
        match (self.family.build)(&params) {
            Ok(d) => {
                let l = loglik(d.as_ref(), self.obs);
                if l.is_nan() {
                    f64::INFINITY
                } else {
                    -l
                }
            }
            Err(_) => f64::INFINITY,
        }
    }
}

/// Central-difference gradient (fourth order) of `f` at `x`, with steps `h`.
fn gradient(f: &dyn Fn(&[f64]) -> f64, x: &[f64], h: &[f64]) -> Vec<f64> {
    (0..x.len())
        .map(|i| {
            let at = |d: f64| {
                let mut y = x.to_vec();
                y[i] += d;
                f(&y)
            };
            let h = h[i];
            (-at(2.0 * h) + 8.0 * at(h) - 8.0 * at(-h) + at(-2.0 * h)) / (12.0 * h)
        })
        .collect()
}

/// Central-difference Hessian of `f` at `x` with steps `h`.
fn hessian_with(f: &dyn Fn(&[f64]) -> f64, x: &[f64], h: &[f64]) -> Vec<Vec<f64>> {
    let k = x.len();
    let at = |di: usize, si: f64, dj: usize, sj: f64| {
        let mut y = x.to_vec();
        y[di] += si * h[di];
        y[dj] += sj * h[dj];
        f(&y)
    };
    let f0 = f(x);
    let mut out = vec![vec![0.0; k]; k];
    for i in 0..k {
        out[i][i] = (at(i, 1.0, i, 0.0) - 2.0 * f0 + at(i, -1.0, i, 0.0)) / (h[i] * h[i]);
        for j in 0..i {
            let v = (at(i, 1.0, j, 1.0) - at(i, 1.0, j, -1.0) - at(i, -1.0, j, 1.0)
                + at(i, -1.0, j, -1.0))
                / (4.0 * h[i] * h[j]);
            out[i][j] = v;
            out[j][i] = v;
        }
    }
    out
}

/// Steps matched to the curvature: a fraction `frac` of each coordinate's
/// standard error 1/sqrt(H_ii), from a first Hessian with relative steps.
/// Fixed relative steps are far too coarse for large samples (the
/// likelihood is sharp) and too fine for tiny ones; this adapts to both.
fn curvature_steps(f: &dyn Fn(&[f64]) -> f64, x: &[f64], frac: f64) -> Vec<f64> {
    let rough: Vec<f64> = x.iter().map(|v| 1e-4 * v.abs().max(1e-3)).collect();
    let h = hessian_with(f, x, &rough);
    (0..x.len())
        .map(|i| {
            let d = h[i][i];
            if d.is_finite() && d > 0.0 {
                (frac / d.sqrt()).min(0.1 * x[i].abs().max(1.0))
            } else {
                rough[i]
            }
        })
        .collect()
}

/// Central-difference Hessian of `f` at `x` with curvature-matched steps.
fn hessian(f: &dyn Fn(&[f64]) -> f64, x: &[f64]) -> Vec<Vec<f64>> {
    let h = curvature_steps(f, x, 0.005);
    hessian_with(f, x, &h)
}

/// Inverse of a small symmetric matrix by Gauss-Jordan elimination with
/// partial pivoting; None when singular. (Matrices here are at most 3 x 3.)
pub fn invert(m: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let k = m.len();
    let mut a: Vec<Vec<f64>> = m
        .iter()
        .enumerate()
        .map(|(i, row)| {
            let mut r = row.clone();
            r.extend((0..k).map(|j| if i == j { 1.0 } else { 0.0 }));
            r
        })
        .collect();
    for col in 0..k {
        let piv = (col..k).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
        if a[piv][col].abs() < 1e-300 || !a[piv][col].is_finite() {
            return None;
        }
        a.swap(col, piv);
        let p = a[col][col];
        for v in a[col].iter_mut() {
            *v /= p;
        }
        for r in 0..k {
            if r != col {
                let factor = a[r][col];
                if factor != 0.0 {
                    let pivot_row = a[col].clone();
                    for (v, p) in a[r].iter_mut().zip(&pivot_row) {
                        *v -= factor * p;
                    }
                }
            }
        }
    }
    let inv: Vec<Vec<f64>> = a.into_iter().map(|r| r[k..].to_vec()).collect();
    inv.iter().flatten().all(|v| v.is_finite()).then_some(inv)
}

/// Guarded Newton steps from Nelder-Mead's answer. Hand-written because
/// Nelder-Mead stops on the spread of its simplex, which leaves the optimum
/// only to ~1e-8 relative, and argmin's Newton solver has no step-halving
/// guard against a finite-difference Hessian that is not yet reliable; two
/// to five steps here bring the parameters to ~1e-12 relative. It stops at
/// the first step below 1e-11 relative: smaller steps only follow the
/// finite-difference noise (measured on a 1 000-life lognormal fit: every
/// later step wandered by 1e-13 to 1e-12 without lowering the objective, and
/// running out the 30 steps took three quarters of the fit's time).
fn polish(f: &dyn Fn(&[f64]) -> f64, mut x: Vec<f64>) -> Vec<f64> {
    let mut fx = f(&x);
    for _ in 0..30 {
        // Small steps for the gradient (its truncation error biases the
        // optimum), larger ones for the Hessian (only its direction matters).
        let h = curvature_steps(f, &x, 0.05);
        let g = gradient(f, &x, &h.iter().map(|v| v * 0.4).collect::<Vec<_>>());
        let Some(hinv) = invert(&hessian_with(f, &x, &h)) else {
            break;
        };
        let step: Vec<f64> = (0..x.len())
            .map(|i| -(0..x.len()).map(|j| hinv[i][j] * g[j]).sum::<f64>())
            .collect();
        let mut t = 1.0;
        let mut moved = false;
        while t > 1e-4 {
            let y: Vec<f64> = x.iter().zip(&step).map(|(a, s)| a + t * s).collect();
            let fy = f(&y);
            if fy <= fx + 8.0 * f64::EPSILON * fx.abs() {
                let small = y
                    .iter()
                    .zip(&x)
                    .all(|(a, b)| (a - b).abs() <= 1e-11 * b.abs().max(1.0));
                x = y;
                fx = fy.min(fx);
                moved = !small;
                break;
            }
            t *= 0.5;
        }
        if !moved {
            break;
        }
    }
    x
}

/// An argmin cost function around a closure.
struct ClosureCost<'a>(&'a dyn Fn(&[f64]) -> f64);

impl CostFunction for ClosureCost<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, x: &Self::Param) -> Result<f64, argmin::core::Error> {
        let v = (self.0)(x);
        Ok(if v.is_nan() { f64::INFINITY } else { v })
    }
}

/// Minimises `f` (a negative log-likelihood in unconstrained coordinates)
/// from `x0`: argmin's Nelder-Mead, then the guarded Newton [`polish`].
pub fn minimize(f: &dyn Fn(&[f64]) -> f64, x0: Vec<f64>) -> LifeResult<Vec<f64>> {
    if x0.is_empty() {
        return Ok(x0);
    }
    let mut simplex = vec![x0.clone()];
    for j in 0..x0.len() {
        let mut v = x0.clone();
        v[j] += 0.2 * x0[j].abs().max(0.5);
        simplex.push(v);
    }
    let solver = NelderMead::new(simplex)
        .with_sd_tolerance(1e-13)
        .map_err(|e| LifeError::NoConvergence(e.to_string()))?;
    let result = Executor::new(ClosureCost(f), solver)
        .configure(|s| s.max_iters(4000))
        .run()
        .map_err(|e| LifeError::NoConvergence(format!("the likelihood search failed: {e}")))?;
    let best =
        result.state().best_param.clone().ok_or_else(|| {
            LifeError::NoConvergence("the likelihood search found no maximum".into())
        })?;
    Ok(polish(f, best))
}

/// Maximum likelihood over the parameters not given in `fixed`, from `start`
/// (natural parameters; None derives one from the data).
pub fn fit(
    family: &'static Family,
    obs: &[Obs],
    start: Option<Vec<f64>>,
    fixed: &[Option<f64>],
) -> LifeResult<Estimate> {
    let k = family.k();
    let mut base = start.unwrap_or_else(|| (family.start)(&start_summary(obs)));
    // A start beyond the searched range (very tight data) starts inside it.
    for (p, v) in family.params.iter().zip(base.iter_mut()) {
        if p.name == "shape" && *v > MAX_SEARCH_SHAPE {
            *v = MAX_SEARCH_SHAPE / 10.0;
        }
    }
    for (i, v) in fixed.iter().enumerate() {
        if let Some(v) = v {
            base[i] = *v;
        }
    }
    let free: Vec<usize> = (0..k)
        .filter(|&i| fixed.get(i).copied().flatten().is_none())
        .collect();
    let objective = Objective {
        family,
        obs,
        base,
        free: free.clone(),
    };
    let x0: Vec<f64> = free
        .iter()
        .map(|&i| family.to_free(&objective.base)[i])
        .collect();
    if !objective.value(&x0).is_finite() {
        return Err(LifeError::NotEstimable(format!(
            "the {} likelihood is zero at the start values {:?}; the data may be impossible for this family",
            family.name, objective.base
        )));
    }
    let x = minimize(&|y: &[f64]| objective.value(y), x0)?;
    let params = objective.natural(&x);
    if beyond_search(family, &params, &free, MAX_SEARCH_SHAPE / 2.0) {
        return Err(LifeError::NotEstimable(format!(
            "the {} shape runs towards the search limit ({}): the failures are too \
             concentrated for this family (a spread below 0.1% of the age); \
             try another family",
            family.name,
            crate::error::show_number(MAX_SEARCH_SHAPE)
        )));
    }
    let d = (family.build)(&params)?;
    let ll = loglik(d.as_ref(), obs);
    if !ll.is_finite() {
        return Err(LifeError::NoConvergence(format!(
            "the {} fit ended where the likelihood is zero",
            family.name
        )));
    }
    let cov = covariance(family, obs, &params, &free)?;
    Ok(Estimate {
        params,
        loglik: ll,
        cov,
    })
}

/// Inverse observed information in natural parameters, by central
/// differences of the log-likelihood; zero rows for fixed parameters.
pub fn covariance(
    family: &'static Family,
    obs: &[Obs],
    params: &[f64],
    free: &[usize],
) -> LifeResult<Vec<Vec<f64>>> {
    let k = family.k();
    let mut cov = vec![vec![0.0; k]; k];
    if free.is_empty() {
        return Ok(cov);
    }
    let neg = |y: &[f64]| {
        let mut all = params.to_vec();
        for (slot, &i) in free.iter().enumerate() {
            all[i] = y[slot];
        }
        match (family.build)(&all) {
            Ok(d) => -loglik(d.as_ref(), obs),
            Err(_) => f64::NAN,
        }
    };
    let x: Vec<f64> = free.iter().map(|&i| params[i]).collect();
    let info = hessian(&neg, &x);
    let inv = invert(&info).filter(|m| (0..m.len()).all(|i| m[i][i] > 0.0));
    let Some(inv) = inv else {
        return Err(LifeError::NotEstimable(format!(
            "the information matrix of the {} fit is singular; the data do not determine all its parameters",
            family.name
        )));
    };
    for (a, &i) in free.iter().enumerate() {
        for (b, &j) in free.iter().enumerate() {
            cov[i][j] = inv[a][b];
        }
    }
    Ok(cov)
}

/// Profile log-likelihood of the 3-parameter Weibull over its location.
struct LocationProfile<'a> {
    family: &'static Family,
    obs: &'a [Obs],
    start: Vec<f64>,
}

impl LocationProfile<'_> {
    fn at(&self, location: f64) -> Option<Estimate> {
        if let Some(e) = self.weibull_shifted(location) {
            return Some(e);
        }
        let mut start = self.start.clone();
        start[2] = location;
        fit(
            self.family,
            self.obs,
            Some(start),
            &[None, None, Some(location)],
        )
        .ok()
    }
}

impl LocationProfile<'_> {
    /// Fast path for the 3-parameter Weibull with exact failures and
    /// suspensions observed from new: at a fixed location the fit is the
    /// 2-parameter Weibull of the shifted ages (suspensions before the
    /// location add nothing to either likelihood), solved by the Weibull
    /// solver in a few passes, log-likelihood included. Measured: the generic search made a
    /// 1 000-life fit take 3.5 s; this takes milliseconds.
    fn weibull_shifted(&self, location: f64) -> Option<Estimate> {
        if self.family.name != "weibull3"
            || self
                .obs
                .iter()
                .any(|o| o.entry > 0.0 || !matches!(o.kind(), Kind::Failure | Kind::Suspension))
        {
            return None;
        }
        let mut shifted = crate::sample::Sample::new();
        for o in self.obs {
            let t = o.earliest - location;
            if t <= 0.0 {
                if o.failed() {
                    return None;
                }
                continue; // a suspension before the location carries no information
            }
            let shifted_obs =
                crate::sample::Sample::observation(t, o.failed().then_some(t), 0.0, o.count as u64)
                    .ok()?;
            shifted.push(shifted_obs).ok()?;
        }
        let est = crate::fit::weibull_mle::fit(&shifted.groups()).ok()?;
        let params = vec![est.shape, est.scale, location];
        let mut cov = vec![vec![0.0; 3]; 3];
        for (row, est_row) in cov.iter_mut().zip(est.cov.iter()) {
            row[..2].copy_from_slice(est_row);
        }
        Some(Estimate {
            params,
            loglik: est.loglik,
            cov,
        })
    }
}

impl CostFunction for LocationProfile<'_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, location: &f64) -> Result<f64, argmin::core::Error> {
        Ok(self.at(*location).map_or(f64::INFINITY, |e| -e.loglik))
    }
}

/// Maximum likelihood for a family whose third parameter is a location
/// (failure-free period) that must lie in [0, first failure): maximise the
/// profile over the location with argmin's Brent minimiser, then polish all
/// parameters together. Refuses when the maximum runs to the first failure,
/// where the likelihood has no interior maximum.
pub fn fit_with_location(family: &'static Family, obs: &[Obs]) -> LifeResult<Estimate> {
    let summary = start_summary(obs);
    let upper = summary.first_failure;
    if !(upper.is_finite() && upper > 0.0) {
        return Err(LifeError::NotEstimable(format!(
            "the {} fit needs at least one failure",
            family.name
        )));
    }
    let profile = LocationProfile {
        family,
        obs,
        start: (family.start)(&summary),
    };
    let hi = upper * (1.0 - 1e-9);
    let solver = BrentOpt::new(0.0, hi).set_tolerance(1e-10, 1e-12 * upper);
    let result = Executor::new(&profile, solver)
        .configure(|s| s.max_iters(200))
        .run()
        .map_err(|e| {
            LifeError::NoConvergence(format!("the {} location search failed: {e}", family.name))
        })?;
    let location = result.state().best_param.unwrap_or(0.0);
    if !location.is_finite() {
        return Err(LifeError::NotEstimable(format!(
            "the {} location search found no usable value for ages this far apart",
            family.name
        )));
    }
    if location > upper * (1.0 - 1e-4) {
        return Err(LifeError::NotEstimable(format!(
            "the {} location runs to the first failure ({}): the likelihood has no \
             interior maximum, so no failure-free period can be estimated; use the \
             2-parameter family",
            family.name,
            crate::error::show_number(upper)
        )));
    }
    let at = profile.at(location).ok_or_else(|| {
        LifeError::NoConvergence(format!(
            "the {} fit failed at location {}",
            family.name,
            crate::error::show_number(location)
        ))
    })?;
    if location <= 1e-6 * upper {
        // On the boundary: no failure-free period; the location is held at 0
        // and its row of the covariance stays zero.
        return profile.at(0.0).ok_or_else(|| {
            LifeError::NoConvergence(format!("the {} fit failed at location 0", family.name))
        });
    }
    // Polish all three together from the profile's maximum.
    let best = match fit(family, obs, Some(at.params.clone()), &[None, None, None]) {
        Ok(e) if e.loglik >= at.loglik && e.params[2] < upper && e.params[2] >= 0.0 => e,
        _ => at,
    };
    // The covariance of all three (the profile's fit held the location fixed).
    let cov = covariance(family, obs, &best.params, &[0, 1, 2])?;
    Ok(Estimate { cov, ..best })
}

impl CostFunction for &LocationProfile<'_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, location: &f64) -> Result<f64, argmin::core::Error> {
        (*self).cost(location)
    }
}
