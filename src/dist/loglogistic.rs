//! Log-logistic distribution: the log of the life is logistic.
//!
//! R(t) = 1 / (1 + (t/alpha)^beta), with shape beta and scale alpha (the
//! median life). The hazard rises then falls for beta > 1 and falls for
//! beta <= 1; the mean exists only for beta > 1.

use super::numerics;
use super::{positive, Family, LifeDistribution, Linearisation, ParamInfo, ParamKind};
use crate::error::LifeResult;
use std::f64::consts::PI;

/// The log-logistic family entry for [`super::FAMILIES`].
pub static FAMILY: Family = Family {
    name: "loglogistic",
    title: "log-logistic: R(t) = 1/(1 + (t/scale)^shape)",
    params: &[
        ParamInfo {
            name: "shape",
            meaning: "shape beta: hazard falls for beta <= 1, rises then falls for beta > 1",
            kind: ParamKind::Positive,
        },
        ParamInfo {
            name: "scale",
            meaning: "median life alpha: age by which half have failed",
            kind: ParamKind::Positive,
        },
    ],
    build: |p| Ok(Box::new(Loglogistic::new(p[0], p[1])?)),
    // ln t is logistic with mean ln alpha and sd pi / (beta sqrt 3).
    start: |s| {
        let beta = if s.sd_ln.is_finite() && s.sd_ln > 0.0 {
            (PI / (3f64.sqrt() * s.sd_ln)).clamp(0.05, 50.0)
        } else {
            1.0
        };
        let alpha = if s.mean_ln.is_finite() {
            s.mean_ln.exp()
        } else {
            1.0
        };
        vec![beta, alpha]
    },
    pinned: 1,
    // t_p = alpha (p/(1-p))^(1/beta)  =>  alpha = t / (p/(1-p))^(1/beta)
    pin_quantile: |p, prob, t| {
        if !(prob > 0.0 && prob < 1.0) {
            return None; // no age pins F = 0 or F = 1
        }
        let alpha = t / (prob / (1.0 - prob)).powf(1.0 / p[0]);
        (alpha.is_finite() && alpha > 0.0).then(|| vec![p[0], alpha])
    },
    // ln(F/(1-F)) = beta ln t - beta ln alpha
    linear: Some(Linearisation {
        x: f64::ln,
        y: |f| f.ln() - (-f).ln_1p(),
        y_inv: |y| 1.0 / (1.0 + (-y).exp()),
        through_origin: false,
        params: |a, b| {
            let alpha = (-a / b).exp();
            (b > 0.0 && alpha.is_finite() && alpha > 0.0).then(|| vec![b, alpha])
        },
    }),
};

/// A log-logistic distribution with shape `beta` and median `alpha`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Loglogistic {
    /// Shape beta > 0.
    pub shape: f64,
    /// Scale alpha > 0, the median life.
    pub scale: f64,
}

impl Loglogistic {
    /// A log-logistic distribution; both parameters finite and positive.
    pub fn new(shape: f64, scale: f64) -> LifeResult<Self> {
        Ok(Loglogistic {
            shape: positive("shape", shape)?,
            scale: positive("scale", scale)?,
        })
    }

    /// (t/alpha)^beta, the odds of failure by age t.
    fn odds(&self, t: f64) -> f64 {
        (t / self.scale).powf(self.shape)
    }
}

impl LifeDistribution for Loglogistic {
    fn family(&self) -> &'static Family {
        &FAMILY
    }

    fn params(&self) -> Vec<f64> {
        vec![self.shape, self.scale]
    }

    /// H(t) = ln(1 + (t/alpha)^beta); beta ln(t/alpha) once the power overflows.
    fn cum_hazard(&self, t: f64) -> f64 {
        let z = self.odds(t);
        if z.is_finite() {
            z.ln_1p()
        } else {
            self.shape * (t / self.scale).ln()
        }
    }

    /// ln f(t) = ln(beta/alpha) + (beta - 1) ln x - 2 ln(1 + x^beta), x = t/alpha;
    /// for x > 1 as ln(beta/alpha) - (beta + 1) ln x - 2 ln(1 + x^-beta),
    /// which neither overflows nor subtracts infinities.
    fn ln_pdf(&self, t: f64) -> f64 {
        let (b, x) = (self.shape, t / self.scale);
        let rest = if x > 1.0 {
            -(b + 1.0) * x.ln() - 2.0 * x.powf(-b).ln_1p()
        } else if b == 1.0 {
            -2.0 * x.ln_1p() // (beta - 1) ln x vanishes, also at x = 0
        } else {
            (b - 1.0) * x.ln() - 2.0 * x.powf(b).ln_1p()
        };
        (b / self.scale).ln() + rest
    }

    /// h(t) = (beta/alpha)(t/alpha)^(beta-1) / (1 + (t/alpha)^beta)
    ///      = (beta/t) / (1 + (t/alpha)^-beta), the second form for t > alpha.
    fn hazard(&self, t: f64) -> f64 {
        let x = t / self.scale;
        if x <= 1.0 {
            (self.shape / self.scale) * x.powf(self.shape - 1.0) / (1.0 + x.powf(self.shape))
        } else {
            (self.shape / t) / (1.0 + x.powf(-self.shape))
        }
    }

    /// t_p = alpha (p/(1-p))^(1/beta)
    fn quantile(&self, p: f64) -> f64 {
        if !(0.0..=1.0).contains(&p) {
            return f64::NAN;
        }
        self.scale * (p / (1.0 - p)).powf(1.0 / self.shape)
    }

    /// mean = alpha (pi/beta) / sin(pi/beta) for beta > 1; infinite otherwise.
    fn mean(&self) -> f64 {
        if self.shape > 1.0 {
            let b = PI / self.shape;
            self.scale * b / b.sin()
        } else {
            f64::INFINITY
        }
    }

    /// integral_0^t R has no elementary form; it is integrated numerically
    /// on the log-age axis measured from t, u = t e^w:
    ///   t * integral e^w R(t e^w) dw  from -inf to 0.
    /// The integrand is smooth there (the age axis has a cusp at 0 for
    /// beta < 1), and w = 0 sits exactly at t, so ln(t/alpha) never has to
    /// be exponentiated back. Below w_lo = min(0, ln(alpha/t)) - 40 the
    /// integrand is at most e^w with R within e^(-40 beta) of 1, so that
    /// piece, about e^w_lo R(t e^w_lo), is added in closed form.
    fn sf_integral(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        if t == f64::INFINITY {
            return self.mean();
        }
        let integrand = |w: f64| {
            let e = w.exp();
            e / (1.0 + self.odds(t * e))
        };
        let w_lo = (self.scale / t).ln().min(0.0) - 40.0;
        t * (integrand(w_lo) + numerics::integrate(integrand, w_lo, 0.0, 1e-15))
    }

    /// H(a + h) - H(a) = ln((1 + z2)/(1 + z1)) = ln(1 + (z2 - z1)/(1 + z1)),
    /// with z2 - z1 = z1 expm1(beta ln(1 + h/a)): no cancellation for short
    /// horizons.
    fn cum_hazard_increment(&self, age: f64, horizon: f64) -> f64 {
        let z1 = self.odds(age);
        let growth = (self.shape * (horizon / age).ln_1p()).exp_m1();
        if age > 0.0 && z1 > 0.0 && growth.is_finite() {
            // z1 / (1 + z1) = 1 / (1 + 1/z1), which also holds when z1 overflows.
            (growth / (1.0 + 1.0 / z1)).ln_1p()
        } else {
            self.cum_hazard(age + horizon) - self.cum_hazard(age)
        }
    }
}
