//! Life distributions: one file per family, each reading like its formulas.
//!
//! A family knows its cumulative hazard, log-density, hazard, quantile, mean
//! and the integral of its survival function, plus a few facts the generic
//! machinery needs (parameter kinds, a start value, how to pin a percentile,
//! its probability-plot axes). It knows nothing of censoring, SQL or JSON:
//! those are written once, elsewhere, for every family.
//! To add a family, write one file here and list it in [`FAMILIES`].

pub mod exponential;
pub mod gamma;
pub mod loglogistic;
pub mod lognormal;
pub mod normal;
pub mod numerics;
pub mod weibull;
pub mod weibull3;

use crate::error::{LifeError, LifeResult};

/// A fully specified life distribution on ages `t >= 0`.
///
/// Implementors supply the family-specific formulas; survival, unreliability,
/// density and conditional failure probability follow from them.
pub trait LifeDistribution:
    Send + Sync + std::fmt::Debug + std::panic::RefUnwindSafe + std::panic::UnwindSafe
{
    /// The family this distribution belongs to.
    fn family(&self) -> &'static Family;
    /// Parameter values in the order of [`Family::params`].
    fn params(&self) -> Vec<f64>;
    /// Cumulative hazard H(t) = -ln R(t).
    fn cum_hazard(&self, t: f64) -> f64;
    /// Natural log of the probability density at `t`.
    fn ln_pdf(&self, t: f64) -> f64;
    /// Hazard (instantaneous failure rate) h(t) = f(t) / R(t).
    fn hazard(&self, t: f64) -> f64;
    /// Age by which a fraction `p` (0 <= p < 1) has failed.
    fn quantile(&self, p: f64) -> f64;
    /// Mean life (mean time to failure); infinite where it does not exist.
    fn mean(&self) -> f64;
    /// Integral of the reliability from 0 to `t`: the expected usage a unit
    /// delivers before failure or before `t`, whichever comes first.
    fn sf_integral(&self, t: f64) -> f64;

    /// H(age + horizon) - H(age). Families override this where a closed form
    /// avoids the cancellation of the plain difference for short horizons.
    fn cum_hazard_increment(&self, age: f64, horizon: f64) -> f64 {
        self.cum_hazard(age + horizon) - self.cum_hazard(age)
    }

    /// Reliability R(t): probability of surviving beyond age `t`.
    fn sf(&self, t: f64) -> f64 {
        (-self.cum_hazard(t)).exp()
    }
    /// Unreliability F(t) = 1 - R(t), computed without cancellation.
    fn cdf(&self, t: f64) -> f64 {
        -(-self.cum_hazard(t)).exp_m1()
    }
    /// Probability density f(t).
    fn pdf(&self, t: f64) -> f64 {
        self.ln_pdf(t).exp()
    }
    /// Probability that a unit which has survived to `age` fails within the
    /// next `horizon`: 1 - R(age + horizon) / R(age).
    fn cond_fail(&self, age: f64, horizon: f64) -> f64 {
        let dh = self.cum_hazard_increment(age, horizon);
        if dh.is_nan() {
            // Both cumulative hazards infinite: the unit cannot have survived
            // to `age` under this model; the conditional is undefined.
            return f64::NAN;
        }
        -(-dh).exp_m1()
    }
}

/// What values a parameter may take; fixes its unconstrained coordinate
/// for the optimiser (log for positive parameters, itself otherwise).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ParamKind {
    /// Strictly positive (shape, scale, sigma): optimised as its logarithm.
    Positive,
    /// Any real number (a location on the log or linear age axis).
    Real,
}

/// Description of one parameter, in the trade's words.
#[derive(Debug)]
pub struct ParamInfo {
    /// JSON key and SQL-facing name.
    pub name: &'static str,
    /// What the parameter means to a reliability engineer.
    pub meaning: &'static str,
    /// Range of the parameter.
    pub kind: ParamKind,
}

/// Summary of roughly-placed ages (failures at their age, intervals at their
/// midpoint) from which a family derives a start value for the optimiser.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StartSummary {
    /// Weighted mean of the ages.
    pub mean: f64,
    /// Weighted standard deviation of the ages.
    pub sd: f64,
    /// Weighted mean of the log-ages (ages > 0).
    pub mean_ln: f64,
    /// Weighted standard deviation of the log-ages.
    pub sd_ln: f64,
    /// Smallest age at which a failure is known to have happened (or could have).
    pub first_failure: f64,
}

/// Probability-plot axes of a family: the plot of y(F) against x(t) is a
/// straight line y = intercept + slope * x for every member of the family.
#[derive(Debug)]
pub struct Linearisation {
    /// Horizontal coordinate of an age (ln t or t).
    pub x: fn(f64) -> f64,
    /// Vertical coordinate of an unreliability F in (0, 1).
    pub y: fn(f64) -> f64,
    /// Inverse of `y`: the unreliability at a plot height.
    pub y_inv: fn(f64) -> f64,
    /// Whether the line is forced through the origin (one-parameter families).
    pub through_origin: bool,
    /// Parameters from the line's (intercept, slope); None if the slope does
    /// not give a valid member (e.g. slope <= 0).
    pub params: fn(f64, f64) -> Option<Vec<f64>>,
}

/// A family of life distributions: its name, parameters and constructor.
#[derive(Debug)]
pub struct Family {
    /// Name used in options and in the model's `dist` key.
    pub name: &'static str,
    /// One-line description in the trade's words, for documentation and errors.
    pub title: &'static str,
    /// The parameters, in the order the constructor takes them.
    pub params: &'static [ParamInfo],
    /// Builds a distribution from parameter values, checking their ranges.
    pub build: fn(&[f64]) -> LifeResult<Box<dyn LifeDistribution>>,
    /// A start value for maximum likelihood from a rough summary of the data.
    pub start: fn(&StartSummary) -> Vec<f64>,
    /// Index of the parameter that [`Family::pin_quantile`] solves for.
    pub pinned: usize,
    /// Given parameters, returns them with the `pinned` one changed so that
    /// the p-quantile equals `t` (None if impossible). Profile-likelihood
    /// bounds on percentile life and reliability hold a percentile fixed this way.
    pub pin_quantile: fn(&[f64], f64, f64) -> Option<Vec<f64>>,
    /// Probability-plot axes, for rank regression and plots; None where the
    /// family has no straight-line plot (gamma, 3-parameter Weibull).
    pub linear: Option<Linearisation>,
}

impl Family {
    /// Number of parameters.
    pub fn k(&self) -> usize {
        self.params.len()
    }

    /// Natural parameters to unconstrained optimiser coordinates.
    pub fn to_free(&self, params: &[f64]) -> Vec<f64> {
        self.params
            .iter()
            .zip(params)
            .map(|(info, &v)| match info.kind {
                ParamKind::Positive => v.ln(),
                ParamKind::Real => v,
            })
            .collect()
    }

    /// Unconstrained optimiser coordinates to natural parameters.
    pub fn from_free(&self, free: &[f64]) -> Vec<f64> {
        self.params
            .iter()
            .zip(free)
            .map(|(info, &v)| match info.kind {
                ParamKind::Positive => v.exp(),
                ParamKind::Real => v,
            })
            .collect()
    }

    /// Position of a parameter by name.
    pub fn param_index(&self, name: &str) -> Option<usize> {
        self.params.iter().position(|p| p.name == name)
    }
}

/// Every family the extension knows, in the order they are documented.
pub static FAMILIES: &[&Family] = &[
    &weibull::FAMILY,
    &weibull3::FAMILY,
    &exponential::FAMILY,
    &lognormal::FAMILY,
    &normal::FAMILY,
    &loglogistic::FAMILY,
    &gamma::FAMILY,
];

/// Looks a family up by name.
pub fn family(name: &str) -> Option<&'static Family> {
    FAMILIES.iter().copied().find(|f| f.name == name)
}

/// Comma-separated family names, for error messages.
pub fn family_names() -> String {
    FAMILIES
        .iter()
        .map(|f| format!("'{}'", f.name))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Checks that a parameter is a finite number above zero.
pub(crate) fn positive(name: &'static str, value: f64) -> LifeResult<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(LifeError::BadModel(format!(
            "{name} must be a finite number > 0, got {}",
            crate::error::show_number(value)
        )))
    }
}

/// Checks that a parameter is a finite number.
#[allow(dead_code)] // used by the families with a location parameter
pub(crate) fn finite(name: &'static str, value: f64) -> LifeResult<f64> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(LifeError::BadModel(format!(
            "{name} must be a finite number, got {}",
            crate::error::show_number(value)
        )))
    }
}

/// Standard normal quantile, for families and bounds; NaN outside [0, 1].
pub fn norm_ppf(p: f64) -> f64 {
    use statrs::distribution::{ContinuousCDF, Normal};
    if (0.0..=1.0).contains(&p) {
        Normal::standard().inverse_cdf(p)
    } else {
        f64::NAN
    }
}

/// Logarithm of the standard normal survival function, accurate far into
/// both tails (statrs' erfc is good only to ~1e-10 relative; see
/// [`numerics::ln_norm_sf`]).
pub fn ln_norm_sf(z: f64) -> f64 {
    numerics::ln_norm_sf(z)
}
