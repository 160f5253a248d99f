//! Life distributions: one file per family, each reading like its formulas.
//!
//! A family knows its cumulative hazard, log-density, hazard, quantile, mean
//! and the integral of its survival function. It knows nothing of censoring,
//! SQL or JSON: those are written once, elsewhere, for every family.
//! To add a family, write one file here and list it in [`FAMILIES`].

pub mod weibull;

use crate::error::{LifeError, LifeResult};

/// A fully specified life distribution on ages `t >= 0`.
///
/// Implementors supply the family-specific formulas; survival, unreliability,
/// density and conditional failure probability follow from them.
pub trait LifeDistribution: Send + Sync + std::fmt::Debug {
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
    /// Mean life (mean time to failure).
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

/// Description of one parameter, in the trade's words.
#[derive(Debug)]
pub struct ParamInfo {
    /// JSON key and SQL-facing name.
    pub name: &'static str,
    /// What the parameter means to a reliability engineer.
    pub meaning: &'static str,
}

/// A family of life distributions: its name, parameters and constructor.
#[derive(Debug)]
pub struct Family {
    /// Name used in options and in the model's `dist` key.
    pub name: &'static str,
    /// The parameters, in the order the constructor takes them.
    pub params: &'static [ParamInfo],
    /// Builds a distribution from parameter values, checking their ranges.
    pub build: fn(&[f64]) -> LifeResult<Box<dyn LifeDistribution>>,
}

/// Every family the extension knows, in the order they are documented.
pub static FAMILIES: &[&Family] = &[&weibull::FAMILY];

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
