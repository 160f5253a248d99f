//! Exponential distribution: a constant hazard (random failures).
//!
//! R(t) = exp(-t/theta), with scale theta the mean life (mean time to
//! failure); the hazard 1/theta is the constant failure rate.

use super::{positive, Family, LifeDistribution, Linearisation, ParamInfo, ParamKind};
use crate::error::LifeResult;

/// The exponential family entry for [`super::FAMILIES`].
pub static FAMILY: Family = Family {
    name: "exponential",
    title: "exponential (constant failure rate): R(t) = exp(-t/scale)",
    params: &[ParamInfo {
        name: "scale",
        meaning: "mean life theta (mean time to failure); the failure rate is 1/theta",
        kind: ParamKind::Positive,
    }],
    build: |p| Ok(Box::new(Exponential::new(p[0])?)),
    // The mean life is the mean age (for complete data, the ML estimate).
    start: |s| {
        let theta = if s.mean.is_finite() && s.mean > 0.0 {
            s.mean
        } else if s.mean_ln.is_finite() {
            s.mean_ln.exp()
        } else {
            1.0
        };
        vec![theta]
    },
    pinned: 0,
    // t_p = -theta ln(1 - p)  =>  theta = t / -ln(1 - p)
    pin_quantile: |_, prob, t| {
        if !(prob > 0.0 && prob < 1.0) {
            return None; // no age pins F = 0 or F = 1
        }
        let theta = t / -(-prob).ln_1p();
        (theta.is_finite() && theta > 0.0).then(|| vec![theta])
    },
    // -ln(1 - F) = t / theta: a line through the origin with slope 1/theta.
    linear: Some(Linearisation {
        x: |t| t,
        y: |f| {
            if (0.0..=1.0).contains(&f) {
                -(-f).ln_1p()
            } else {
                f64::NAN
            }
        },
        y_inv: |y| -(-y).exp_m1(),
        through_origin: true,
        params: |_, b| {
            let theta = 1.0 / b;
            (b > 0.0 && theta.is_finite()).then(|| vec![theta])
        },
    }),
};

/// An exponential distribution with mean life `theta`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Exponential {
    /// Mean life theta > 0.
    pub scale: f64,
}

impl Exponential {
    /// An exponential distribution; the mean life must be finite and positive.
    pub fn new(scale: f64) -> LifeResult<Self> {
        Ok(Exponential {
            scale: positive("scale", scale)?,
        })
    }
}

impl LifeDistribution for Exponential {
    fn family(&self) -> &'static Family {
        &FAMILY
    }

    fn params(&self) -> Vec<f64> {
        vec![self.scale]
    }

    /// H(t) = t/theta
    fn cum_hazard(&self, t: f64) -> f64 {
        t / self.scale
    }

    /// ln f(t) = -ln theta - t/theta
    fn ln_pdf(&self, t: f64) -> f64 {
        -self.scale.ln() - t / self.scale
    }

    /// h(t) = 1/theta
    fn hazard(&self, _t: f64) -> f64 {
        1.0 / self.scale
    }

    /// t_p = -theta ln(1 - p)
    fn quantile(&self, p: f64) -> f64 {
        if !(0.0..=1.0).contains(&p) {
            return f64::NAN;
        }
        -self.scale * (-p).ln_1p()
    }

    /// mean = theta
    fn mean(&self) -> f64 {
        self.scale
    }

    /// integral_0^t R = theta (1 - exp(-t/theta))
    fn sf_integral(&self, t: f64) -> f64 {
        -self.scale * (-t / self.scale).exp_m1()
    }

    /// H(a + h) - H(a) = h/theta exactly: memoryless, no cancellation.
    fn cum_hazard_increment(&self, _age: f64, horizon: f64) -> f64 {
        horizon / self.scale
    }
}
