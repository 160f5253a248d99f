//! Two-parameter Weibull distribution.
//!
//! R(t) = exp(-(t/eta)^beta), with shape beta (slope; < 1 early-life,
//! = 1 random, > 1 wear-out failures) and scale eta (characteristic life:
//! the age by which 63.2% have failed).

use super::{positive, Family, LifeDistribution, Linearisation, ParamInfo, ParamKind};
use crate::error::LifeResult;
use statrs::function::gamma::{checked_gamma_lr, gamma};

/// The Weibull family entry for [`super::FAMILIES`].
pub static FAMILY: Family = Family {
    name: "weibull",
    title: "2-parameter Weibull: R(t) = exp(-(t/scale)^shape)",
    params: &[
        ParamInfo {
            name: "shape",
            meaning: "Weibull slope beta: < 1 early-life, 1 random, > 1 wear-out",
            kind: ParamKind::Positive,
        },
        ParamInfo {
            name: "scale",
            meaning: "characteristic life eta: age by which 63.2% have failed",
            kind: ParamKind::Positive,
        },
    ],
    build: |p| Ok(Box::new(Weibull::new(p[0], p[1])?)),
    // For complete data sd(ln t) = pi / (beta sqrt 6); eta ~ exp(mean ln t + 0.5772/beta).
    start: |s| {
        let beta = if s.sd_ln > 0.0 {
            (std::f64::consts::PI / (6f64.sqrt() * s.sd_ln)).clamp(0.05, 50.0)
        } else {
            1.0
        };
        vec![beta, (s.mean_ln + 0.5772 / beta).exp()]
    },
    pinned: 1,
    // t_p = eta (-ln(1-p))^(1/beta)  =>  eta = t / (-ln(1-p))^(1/beta)
    pin_quantile: |p, prob, t| {
        let eta = t / (-(-prob).ln_1p()).powf(1.0 / p[0]);
        (eta.is_finite() && eta > 0.0).then(|| vec![p[0], eta])
    },
    // ln(-ln(1 - F)) = beta ln t - beta ln eta
    linear: Some(Linearisation {
        x: f64::ln,
        y: |f| (-(-f).ln_1p()).ln(),
        y_inv: |y| -(-y.exp()).exp_m1(),
        through_origin: false,
        params: |a, b| (b > 0.0).then(|| vec![b, (-a / b).exp()]),
    }),
};

/// A Weibull distribution with shape `beta` and scale `eta`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Weibull {
    /// Shape (slope) beta > 0.
    pub shape: f64,
    /// Scale (characteristic life) eta > 0.
    pub scale: f64,
}

impl Weibull {
    /// A Weibull distribution; both parameters must be finite and positive.
    pub fn new(shape: f64, scale: f64) -> LifeResult<Self> {
        Ok(Weibull {
            shape: positive("shape", shape)?,
            scale: positive("scale", scale)?,
        })
    }
}

impl LifeDistribution for Weibull {
    fn family(&self) -> &'static Family {
        &FAMILY
    }

    fn params(&self) -> Vec<f64> {
        vec![self.shape, self.scale]
    }

    /// H(t) = (t/eta)^beta
    fn cum_hazard(&self, t: f64) -> f64 {
        (t / self.scale).powf(self.shape)
    }

    /// ln f(t) = ln(beta/eta) + (beta - 1) ln(t/eta) - (t/eta)^beta
    fn ln_pdf(&self, t: f64) -> f64 {
        let z = t / self.scale;
        let power_term = if self.shape == 1.0 {
            0.0 // (beta - 1) ln z with beta = 1, also at z = 0
        } else {
            (self.shape - 1.0) * z.ln()
        };
        (self.shape / self.scale).ln() + power_term - z.powf(self.shape)
    }

    /// H(a + h) - H(a) = (a/eta)^beta expm1(beta ln(1 + h/a)): exact for
    /// short horizons where the plain difference loses digits.
    fn cum_hazard_increment(&self, age: f64, horizon: f64) -> f64 {
        if age > 0.0 && horizon.is_finite() {
            self.cum_hazard(age) * (self.shape * (horizon / age).ln_1p()).exp_m1()
        } else {
            self.cum_hazard(age + horizon) - self.cum_hazard(age)
        }
    }

    /// h(t) = (beta/eta) (t/eta)^(beta - 1)
    fn hazard(&self, t: f64) -> f64 {
        (self.shape / self.scale) * (t / self.scale).powf(self.shape - 1.0)
    }

    /// t_p = eta (-ln(1 - p))^(1/beta)
    fn quantile(&self, p: f64) -> f64 {
        self.scale * (-(-p).ln_1p()).powf(1.0 / self.shape)
    }

    /// mean = eta Gamma(1 + 1/beta)
    fn mean(&self) -> f64 {
        self.scale * gamma(1.0 + 1.0 / self.shape)
    }

    /// integral_0^t R = eta Gamma(1 + 1/beta) P(1/beta, (t/eta)^beta),
    /// with P the regularised lower incomplete gamma function.
    fn sf_integral(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        let x = self.cum_hazard(t);
        let p = if x == f64::INFINITY {
            1.0
        } else if x > 0.0 {
            checked_gamma_lr(1.0 / self.shape, x).unwrap_or(f64::NAN)
        } else {
            0.0
        };
        self.mean() * p
    }
}
