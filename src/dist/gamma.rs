//! Gamma distribution.
//!
//! R(t) = Q(k, t/theta), with shape k, scale theta and Q the regularised
//! upper incomplete gamma function; mean life k theta. For whole k it is the
//! life of a unit that fails at the k-th of a series of random (exponential)
//! shocks. The hazard falls for k < 1, is constant for k = 1 and rises for
//! k > 1, levelling off at 1/theta.

use super::numerics::{self, gamma_quantile, inc_gamma, ln_gamma_prefix};
use super::{positive, Family, LifeDistribution, ParamInfo, ParamKind};
use crate::error::LifeResult;

/// The gamma family entry for [`super::FAMILIES`].
pub static FAMILY: Family = Family {
    name: "gamma",
    title: "gamma: R(t) = Q(shape, t/scale), Q the regularised upper incomplete gamma function",
    params: &[
        ParamInfo {
            name: "shape",
            meaning: "shape k: hazard falls for k < 1, constant for 1, rises for k > 1",
            kind: ParamKind::Positive,
        },
        ParamInfo {
            name: "scale",
            meaning: "scale theta; the mean life is k theta",
            kind: ParamKind::Positive,
        },
    ],
    build: |p| Ok(Box::new(Gamma::new(p[0], p[1])?)),
    // Moments: mean = k theta, variance = k theta^2.
    start: |s| {
        if s.mean.is_finite() && s.mean > 0.0 && s.sd.is_finite() && s.sd > 0.0 {
            let k = ((s.mean / s.sd).powi(2)).clamp(0.01, 1e4);
            vec![k, s.mean / k]
        } else {
            vec![1.0, if s.mean > 0.0 { s.mean } else { 1.0 }]
        }
    },
    pinned: 1,
    // t_p = theta x_p(k), x_p the standard gamma quantile  =>  theta = t / x_p(k)
    pin_quantile: |p, prob, t| {
        if !(prob > 0.0 && prob < 1.0) {
            return None; // no age pins F = 0 or F = 1
        }
        let theta = t / gamma_quantile(p[0], prob);
        (theta.is_finite() && theta > 0.0).then(|| vec![p[0], theta])
    },
    linear: None,
};

/// A gamma distribution with shape `k` and scale `theta`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gamma {
    /// Shape k > 0.
    pub shape: f64,
    /// Scale theta > 0.
    pub scale: f64,
}

impl Gamma {
    /// A gamma distribution; both parameters finite and positive.
    pub fn new(shape: f64, scale: f64) -> LifeResult<Self> {
        Ok(Gamma {
            shape: positive("shape", shape)?,
            scale: positive("scale", scale)?,
        })
    }

    /// f(0): infinite for k < 1, 1/theta for k = 1, 0 for k > 1.
    fn pdf_at_zero(&self) -> f64 {
        match self.shape.partial_cmp(&1.0) {
            Some(std::cmp::Ordering::Less) => f64::INFINITY,
            Some(std::cmp::Ordering::Equal) => 1.0 / self.scale,
            _ => 0.0,
        }
    }
}

impl LifeDistribution for Gamma {
    fn family(&self) -> &'static Family {
        &FAMILY
    }

    fn params(&self) -> Vec<f64> {
        vec![self.shape, self.scale]
    }

    /// H(t) = -ln Q(k, t/theta) (ln Q formed as ln(1 - P) where P is small).
    fn cum_hazard(&self, t: f64) -> f64 {
        -inc_gamma(self.shape, t / self.scale).ln_q
    }

    /// ln f(t) = k ln x - x - ln Gamma(k) - ln t, x = t/theta
    fn ln_pdf(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return self.pdf_at_zero().ln();
        }
        ln_gamma_prefix(self.shape, t / self.scale) - t.ln()
    }

    /// h(t) = f(t) / Q(k, x) = [x^k e^-x / Gamma(k) / Q(k, x)] / t, the
    /// bracket from the continued fraction itself where Q is small.
    fn hazard(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return self.pdf_at_zero();
        }
        if t == f64::INFINITY {
            return 1.0 / self.scale; // the hazard levels off at 1/theta
        }
        inc_gamma(self.shape, t / self.scale).ln_prefix_over_q.exp() / t
    }

    /// t_p = theta x_p(k), x_p the standard gamma p-quantile.
    fn quantile(&self, p: f64) -> f64 {
        self.scale * gamma_quantile(self.shape, p)
    }

    /// mean = k theta
    fn mean(&self) -> f64 {
        self.shape * self.scale
    }

    /// integral_0^t R = t Q(k, x) + k theta P(k + 1, x), x = t/theta
    /// (by parts: integral_0^t u f(u) du = k theta P(k + 1, x)).
    fn sf_integral(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        if t == f64::INFINITY {
            return self.mean();
        }
        let x = t / self.scale;
        let survivors = t * inc_gamma(self.shape, x).ln_q.exp();
        let failed = self.mean() * inc_gamma(self.shape + 1.0, x).ln_p.exp();
        survivors + failed
    }

    /// H(a + h) - H(a), integrating the hazard where the plain difference
    /// cancels (see [`numerics::cum_hazard_increment`]).
    fn cum_hazard_increment(&self, age: f64, horizon: f64) -> f64 {
        numerics::cum_hazard_increment(|t| self.cum_hazard(t), |t| self.hazard(t), age, horizon)
    }
}
