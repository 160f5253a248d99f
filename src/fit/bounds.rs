//! Confidence bounds on parameters, percentile life and reliability.
//!
//! Three methods, chosen by the caller:
//! - Fisher matrix: normal approximation on a transformed quantity (log of
//!   positive parameters and of percentile life, log(-log) of reliability),
//!   with the variance from the model's covariance by the delta method.
//! - Likelihood ratio: the set of values whose profile log-likelihood lies
//!   within z^2/2 of the maximum. Needs the data, so the model must have
//!   been fitted with `keep_sample`.
//! - Chi-square: the known-shape Weibull bound on the scale (and through it
//!   on percentile life and reliability), from the chi-square distribution
//!   with 2r+2 degrees of freedom (lower) or 2r (upper).
//!
//! Knows nothing of SQL.

use crate::dist::{norm_ppf, LifeDistribution, ParamKind};
use crate::error::{show_number, LifeError, LifeResult};
use crate::fit::mle;
use crate::model::Model;
use crate::sample::Obs;
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentRoot;
use statrs::function::gamma::checked_gamma_lr;

/// How a bound is computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BoundMethod {
    /// Fisher-matrix (normal approximation) bounds.
    Fisher,
    /// Likelihood-ratio (profile likelihood) bounds.
    LikelihoodRatio,
    /// Chi-square bounds of the known-shape Weibull method.
    ChiSquare,
}

/// Accepted method names, as the SQL functions spell them.
pub const METHOD_NAMES: &[&str] = &["fisher", "lr", "chi2"];

impl BoundMethod {
    /// Reads a method name.
    pub fn parse(name: &str) -> LifeResult<Self> {
        match name {
            "fisher" => Ok(BoundMethod::Fisher),
            "lr" => Ok(BoundMethod::LikelihoodRatio),
            "chi2" => Ok(BoundMethod::ChiSquare),
            other => Err(LifeError::BadArgument {
                arg: "method",
                expected: "must be 'fisher', 'lr' or 'chi2'",
                got: format!("'{}'", other.chars().take(40).collect::<String>()),
            }),
        }
    }
}

/// Which end of the interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Side {
    /// The lower bound.
    Lower,
    /// The upper bound.
    Upper,
}

/// What a bound is wanted on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Quantity {
    /// A parameter, by index in the family's order.
    Param(usize),
    /// The age by which a fraction p has failed (percentile life).
    Quantile(f64),
    /// Reliability at an age.
    Reliability(f64),
}

/// Confidence level and sidedness.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Level {
    /// Confidence level in (0, 1).
    pub conf: f64,
    /// 1 for a one-sided bound, 2 for an end of a two-sided interval.
    pub sides: u8,
}

impl Level {
    /// Checks the level.
    pub fn new(conf: f64, sides: i64) -> LifeResult<Self> {
        if !(conf > 0.0 && conf < 1.0) {
            return Err(LifeError::bad(
                "conf",
                "must be in (0, 1)",
                show_number(conf),
            ));
        }
        let sides = match sides {
            1 => 1,
            2 => 2,
            s => return Err(LifeError::bad("sides", "must be 1 or 2", s)),
        };
        if sides == 1 && conf < 0.5 {
            return Err(LifeError::bad(
                "conf",
                "must be at least 0.5 for a one-sided bound",
                show_number(conf),
            ));
        }
        Ok(Level { conf, sides })
    }

    /// Standard normal quantile for this level: Phi^-1((1+C)/2) for a
    /// two-sided interval, Phi^-1(C) for a one-sided bound.
    pub fn z(&self) -> f64 {
        if self.sides == 2 {
            norm_ppf(0.5 + 0.5 * self.conf)
        } else {
            norm_ppf(self.conf)
        }
    }

    /// Tail probability of one end: (1-C)/2 two-sided, 1-C one-sided.
    fn tail(&self) -> f64 {
        if self.sides == 2 {
            0.5 * (1.0 - self.conf)
        } else {
            1.0 - self.conf
        }
    }
}

/// The value of a quantity under a distribution.
fn value_of(d: &dyn LifeDistribution, q: Quantity) -> f64 {
    match q {
        Quantity::Param(i) => d.params()[i],
        Quantity::Quantile(p) => d.quantile(p),
        Quantity::Reliability(t) => d.sf(t),
    }
}

/// A bound on `q` for `model`.
pub fn bound(
    model: &Model,
    q: Quantity,
    level: Level,
    method: BoundMethod,
    side: Side,
) -> LifeResult<f64> {
    let fam = model.dist.family();
    if let Quantity::Param(i) = q {
        if i >= fam.k() {
            return Err(LifeError::bad(
                "param",
                "must name a parameter of the model",
                i,
            ));
        }
    }
    // Trivial ends: reliability at age 0 is 1 under every member.
    if let Quantity::Reliability(t) = q {
        if model.dist.cum_hazard(t) == 0.0 {
            return Ok(1.0);
        }
    }
    match method {
        BoundMethod::Fisher => fisher(model, q, level, side),
        BoundMethod::LikelihoodRatio => likelihood_ratio(model, q, level, side),
        BoundMethod::ChiSquare => chi_square(model, q, level, side),
    }
}

fn fisher(model: &Model, q: Quantity, level: Level, side: Side) -> LifeResult<f64> {
    let fam = model.dist.family();
    let cov = model
        .fit
        .as_ref()
        .map(|f| &f.cov)
        .filter(|c| c.len() == fam.k())
        .ok_or_else(|| {
            LifeError::NotEstimable(
                "Fisher-matrix bounds need a maximum-likelihood model with its covariance".into(),
            )
        })?;
    let params = model.dist.params();
    let z = level.z() * if side == Side::Lower { -1.0 } else { 1.0 };
    // Transformed quantity g and its inverse.
    let positive_param =
        matches!(q, Quantity::Param(i) if fam.params[i].kind == ParamKind::Positive);
    let value = value_of(model.dist.as_ref(), q);
    let transform = |v: f64| -> f64 {
        match q {
            Quantity::Param(_) if positive_param => v.ln(),
            Quantity::Param(_) => v,
            Quantity::Quantile(_) if value > 0.0 => v.ln(),
            Quantity::Quantile(_) => v,
            Quantity::Reliability(_) => (-v.ln()).ln(), // ln H
        }
    };
    let g0 = transform(value);
    // Gradient of g with respect to the natural parameters.
    let mut grad = vec![0.0; fam.k()];
    for (i, slot) in grad.iter_mut().enumerate() {
        if cov[i][i] == 0.0 {
            continue; // a fixed parameter
        }
        let h = 1e-6 * params[i].abs().max(cov[i][i].sqrt());
        let at = |s: f64| -> LifeResult<f64> {
            let mut p = params.clone();
            p[i] += s * h;
            let d = (fam.build)(&p)?;
            Ok(match q {
                Quantity::Reliability(t) => d.cum_hazard(t).ln(),
                _ => transform(value_of(d.as_ref(), q)),
            })
        };
        *slot = (at(1.0)? - at(-1.0)?) / (2.0 * h);
    }
    let var: f64 = (0..fam.k())
        .flat_map(|i| (0..fam.k()).map(move |j| (i, j)))
        .map(|(i, j)| grad[i] * cov[i][j] * grad[j])
        .sum();
    if !(var.is_finite() && var >= 0.0) {
        return Err(LifeError::NotEstimable(
            "the Fisher-matrix variance is not a finite number".into(),
        ));
    }
    let g = g0 + z * var.sqrt();
    Ok(match q {
        Quantity::Param(_) if positive_param => g.exp(),
        Quantity::Param(_) => g,
        Quantity::Quantile(_) if value > 0.0 => g.exp(),
        Quantity::Quantile(_) => g,
        // Reliability falls as ln H rises: the upper R comes from the lower ln H.
        Quantity::Reliability(_) => {
            let g = g0 - z * var.sqrt();
            (-g.exp()).exp()
        }
    })
}

/// Inverse of the chi-square distribution function with `df` degrees of
/// freedom, by argmin's Brent root finder on statrs' regularised gamma.
pub fn chi2_inv(df: f64, p: f64) -> LifeResult<f64> {
    struct Cdf {
        df: f64,
        p: f64,
    }
    impl CostFunction for Cdf {
        type Param = f64;
        type Output = f64;
        fn cost(&self, x: &f64) -> Result<f64, argmin::core::Error> {
            if *x <= 0.0 {
                return Ok(-self.p);
            }
            Ok(checked_gamma_lr(0.5 * self.df, 0.5 * x).unwrap_or(f64::NAN) - self.p)
        }
    }
    let mut hi = df.max(1.0);
    let problem = Cdf { df, p };
    while problem.cost(&hi).unwrap_or(f64::NAN) < 0.0 {
        hi *= 2.0;
        if hi > 1e12 {
            return Err(LifeError::NoConvergence(
                "chi-square quantile out of range".into(),
            ));
        }
    }
    let result = Executor::new(problem, BrentRoot::new(0.0, hi, 0.0))
        .configure(|s| s.max_iters(300))
        .run()
        .map_err(|e| LifeError::NoConvergence(format!("chi-square quantile: {e}")))?;
    result
        .state()
        .best_param
        .ok_or_else(|| LifeError::NoConvergence("chi-square quantile not found".into()))
}

fn chi_square(model: &Model, q: Quantity, level: Level, side: Side) -> LifeResult<f64> {
    let known = model
        .fit
        .as_ref()
        .and_then(|f| f.known.clone())
        .ok_or_else(|| {
            LifeError::NotEstimable(
            "chi-square bounds need a Weibull fitted with a known shape (options {\"shape\": ...})"
                .into(),
        )
        })?;
    let params = model.dist.params();
    let (shape, r) = (params[0], known.failures as f64);
    // Scale bound; percentile life and reliability grow with the scale.
    let scale_bound = |which: Side| -> LifeResult<f64> {
        Ok(match which {
            Side::Lower => (2.0 * known.exposure / chi2_inv(2.0 * r + 2.0, 1.0 - level.tail())?)
                .powf(1.0 / shape),
            Side::Upper if r == 0.0 => f64::INFINITY,
            Side::Upper => {
                (2.0 * known.exposure / chi2_inv(2.0 * r, level.tail())?).powf(1.0 / shape)
            }
        })
    };
    let eta = scale_bound(side)?;
    let fam = model.dist.family();
    match q {
        Quantity::Param(0) => Ok(shape),
        Quantity::Param(_) => Ok(eta),
        _ if eta.is_infinite() => Ok(match q {
            Quantity::Reliability(_) => 1.0,
            _ => f64::INFINITY,
        }),
        _ => Ok(value_of((fam.build)(&[shape, eta])?.as_ref(), q)),
    }
}

/// The profile log-likelihood of a quantity held at a value: the maximum
/// over the remaining parameters.
struct Profile<'a> {
    model: &'a Model,
    obs: &'a [Obs],
    q: Quantity,
    /// Parameters held fixed in the fit (e.g. a known shape).
    fixed: Vec<bool>,
    /// The maximum-likelihood parameters (start values for every profile).
    mle: Vec<f64>,
}

impl Profile<'_> {
    /// Parameters with the quantity at `v` and the others from free coordinates `x`.
    fn params(&self, v: f64, x: &[f64], free: &[usize]) -> Option<Vec<f64>> {
        let fam = self.model.dist.family();
        let mut all = fam.to_free(&self.mle);
        for (slot, &i) in free.iter().enumerate() {
            all[i] = x[slot];
        }
        let mut p = fam.from_free(&all);
        match self.q {
            Quantity::Param(i) => {
                p[i] = v;
                Some(p)
            }
            Quantity::Quantile(prob) => (fam.pin_quantile)(&p, prob, v),
            Quantity::Reliability(t) => (fam.pin_quantile)(&p, 1.0 - v, t),
        }
    }

    /// Indices of the parameters the profile maximises over.
    fn free(&self) -> Vec<usize> {
        let fam = self.model.dist.family();
        let held = match self.q {
            Quantity::Param(i) => i,
            _ => fam.pinned,
        };
        (0..fam.k())
            .filter(|&i| i != held && !self.fixed[i])
            .collect()
    }

    fn value(&self, v: f64) -> f64 {
        let fam = self.model.dist.family();
        let free = self.free();
        let neg = |x: &[f64]| -> f64 {
            match self.params(v, x, &free).map(|p| (fam.build)(&p)) {
                Some(Ok(d)) => -mle::loglik(d.as_ref(), self.obs),
                _ => f64::INFINITY,
            }
        };
        let x0: Vec<f64> = free.iter().map(|&i| fam.to_free(&self.mle)[i]).collect();
        if !neg(&x0).is_finite() && !free.is_empty() {
            // The MLE's other parameters are impossible with this value;
            // the optimiser still searches from them.
        }
        match mle::minimize(&neg, x0) {
            Ok(x) => -neg(&x),
            Err(_) => f64::NEG_INFINITY,
        }
    }
}

fn likelihood_ratio(model: &Model, q: Quantity, level: Level, side: Side) -> LifeResult<f64> {
    let fam = model.dist.family();
    let fit = model.fit.as_ref();
    let obs = fit.and_then(|f| f.sample.as_ref()).ok_or_else(|| {
        LifeError::NotEstimable(
            "likelihood-ratio bounds need the data: fit with options {\"keep_sample\": true}"
                .into(),
        )
    })?;
    let fixed: Vec<bool> = fam
        .params
        .iter()
        .map(|p| fit.is_some_and(|f| f.fixed.iter().any(|n| n == p.name)))
        .collect();
    if let Quantity::Param(i) = q {
        if fixed[i] {
            return Ok(model.dist.params()[i]);
        }
    } else if fixed[fam.pinned] {
        return Err(LifeError::NotEstimable(format!(
            "likelihood-ratio bounds on percentile life and reliability need the {} to be estimated, not fixed",
            fam.params[fam.pinned].name
        )));
    }
    let mle = model.dist.params();
    let best = mle::loglik(model.dist.as_ref(), obs);
    let target = best - 0.5 * level.z().powi(2);
    let profile = Profile {
        model,
        obs,
        q,
        fixed,
        mle: mle.clone(),
    };
    let v0 = value_of(model.dist.as_ref(), q);
    // Work in a coordinate where the quantity is unbounded: log for positive
    // quantities, logit for reliability.
    let (to, from): (Map, Map) = match q {
        Quantity::Param(i) if fam.params[i].kind == ParamKind::Real => (|v| v, |u| u),
        Quantity::Quantile(_) if v0 <= 0.0 => (|v| v, |u| u),
        Quantity::Reliability(_) => (|v| (v / (1.0 - v)).ln(), |u| 1.0 / (1.0 + (-u).exp())),
        _ => (f64::ln, f64::exp),
    };
    // Which way to walk: the lower bound of the quantity, in coordinate u.
    let dir = if side == Side::Lower { -1.0 } else { 1.0 };
    let u0 = to(v0);
    let f = |u: f64| profile.value(from(u)) - target;
    // Step scale from the Fisher variance when there is one, else 10%.
    let step = fisher_step(model, q).unwrap_or(0.1).clamp(1e-6, 10.0);
    let mut inner = u0;
    let mut outer = u0 + dir * step;
    let mut fo = f(outer);
    let mut tries = 0;
    while fo > 0.0 {
        inner = outer;
        outer = u0 + dir * step * 2f64.powi(tries + 1);
        fo = f(outer);
        tries += 1;
        if tries > 60 || !outer.is_finite() {
            return Ok(from(dir * f64::INFINITY));
        }
    }
    if fo.is_nan() {
        // Walked out of the region where the quantity has any likelihood:
        // shrink back until the profile is defined.
        let (mut a, mut b) = (inner, outer);
        for _ in 0..200 {
            let m = 0.5 * (a + b);
            let fm = f(m);
            if fm.is_nan() {
                b = m;
            } else if fm > 0.0 {
                a = m;
            } else {
                outer = m;
                break;
            }
        }
    }
    struct Root<'a>(&'a dyn Fn(f64) -> f64);
    impl CostFunction for Root<'_> {
        type Param = f64;
        type Output = f64;
        fn cost(&self, u: &f64) -> Result<f64, argmin::core::Error> {
            Ok((self.0)(*u))
        }
    }
    let (lo, hi) = if inner < outer {
        (inner, outer)
    } else {
        (outer, inner)
    };
    let result = Executor::new(Root(&f), BrentRoot::new(lo, hi, 1e-12))
        .configure(|s| s.max_iters(200))
        .run()
        .map_err(|e| LifeError::NoConvergence(format!("likelihood-ratio bound: {e}")))?;
    let u = result
        .state()
        .best_param
        .ok_or_else(|| LifeError::NoConvergence("likelihood-ratio bound not found".into()))?;
    Ok(from(u))
}

/// A change of coordinate.
type Map = fn(f64) -> f64;

/// Fisher standard error of the quantity in the search coordinate, if available.
fn fisher_step(model: &Model, q: Quantity) -> Option<f64> {
    let z1 = Level {
        conf: 0.6826894921370859,
        sides: 2,
    };
    let up = fisher(model, q, z1, Side::Upper).ok()?;
    let v0 = value_of(model.dist.as_ref(), q);
    let s = match q {
        Quantity::Reliability(_) => {
            let logit = |v: f64| (v / (1.0 - v)).ln();
            (logit(up) - logit(v0)).abs()
        }
        _ if v0 > 0.0 && up > 0.0 => (up / v0).ln().abs(),
        _ => (up - v0).abs(),
    };
    (s.is_finite() && s > 0.0).then_some(s)
}
