//! Three-parameter Weibull distribution: a Weibull shifted by a failure-free
//! period.
//!
//! R(t) = 1 for t <= gamma and exp(-((t - gamma)/eta)^beta) beyond, with
//! shape beta, scale eta and location gamma (the failure-free period: no
//! failures before it). It is the 2-parameter Weibull of the age beyond gamma.
//! A negative location is accepted (some units could then fail "before
//! age 0": R(0) < 1, and `quantile` returns the formula value, below 0 for
//! small p); the fitter keeps gamma below the first failure.

use super::numerics::{self, CANCELLATION};
use super::weibull::Weibull;
use super::{finite, Family, LifeDistribution, ParamInfo, ParamKind, StartSummary};
use crate::error::LifeResult;
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentRoot;
use statrs::function::gamma::ln_gamma;

/// The 3-parameter Weibull family entry for [`super::FAMILIES`].
pub static FAMILY: Family = Family {
    name: "weibull3",
    title: "3-parameter Weibull: R(t) = exp(-((t - location)/scale)^shape) beyond location",
    params: &[
        ParamInfo {
            name: "shape",
            meaning: "Weibull slope beta of the age beyond the location",
            kind: ParamKind::Positive,
        },
        ParamInfo {
            name: "scale",
            meaning: "characteristic life eta beyond the location",
            kind: ParamKind::Positive,
        },
        ParamInfo {
            name: "location",
            meaning: "failure-free period gamma: no failures before this age",
            kind: ParamKind::Real,
        },
    ],
    build: |p| Ok(Box::new(Weibull3::new(p[0], p[1], p[2])?)),
    start,
    pinned: 1,
    // t_p = gamma + eta (-ln(1-p))^(1/beta)  =>  eta = (t - gamma) / (-ln(1-p))^(1/beta)
    pin_quantile: |p, prob, t| {
        if !(prob > 0.0 && prob < 1.0) {
            return None; // no age pins F = 0 or F = 1
        }
        if t <= p[2] {
            return None;
        }
        let eta = (t - p[2]) / (-(-prob).ln_1p()).powf(1.0 / p[0]);
        (eta.is_finite() && eta > 0.0).then(|| vec![p[0], eta, p[2]])
    },
    linear: None,
};

/// Start: location half the first failure age (safely below it), then a
/// Weibull matching the mean and standard deviation of the ages beyond it.
/// (The summary holds the log moments of the ages, not of the ages less the
/// location, so the shape comes from the coefficient of variation:
/// CV^2 = Gamma(1 + 2/beta) / Gamma(1 + 1/beta)^2 - 1.)
fn start(s: &StartSummary) -> Vec<f64> {
    let location = if s.first_failure.is_finite() && s.first_failure > 0.0 {
        0.5 * s.first_failure
    } else {
        0.0
    };
    let m = s.mean - location;
    if !(m.is_finite() && m > 0.0 && s.sd.is_finite() && s.sd > 0.0) {
        let scale = if m.is_finite() && m > 0.0 { m } else { 1.0 };
        return vec![1.0, scale, location];
    }
    let beta = shape_from_cv(s.sd / m);
    vec![beta, m / ln_gamma(1.0 + 1.0 / beta).exp(), location]
}

/// ln(1 + CV^2) - [ln Gamma(1 + 2/beta) - 2 ln Gamma(1 + 1/beta)] as a
/// function of ln beta: increasing, zero at the Weibull shape with that CV.
struct CvEquation {
    ln_1p_cv2: f64,
}

impl CostFunction for CvEquation {
    type Param = f64;
    type Output = f64;
    fn cost(&self, ln_beta: &f64) -> Result<f64, argmin::core::Error> {
        let b = ln_beta.exp();
        Ok(self.ln_1p_cv2 - (ln_gamma(1.0 + 2.0 / b) - 2.0 * ln_gamma(1.0 + 1.0 / b)))
    }
}

/// The Weibull shape with coefficient of variation `cv`, within [0.05, 50].
fn shape_from_cv(cv: f64) -> f64 {
    let (lo, hi) = (0.05f64.ln(), 50f64.ln());
    let eq = CvEquation {
        ln_1p_cv2: (cv * cv).ln_1p(),
    };
    let at = |x: f64| eq.cost(&x).unwrap_or(f64::NAN);
    if at(lo) >= 0.0 {
        return 0.05;
    }
    if at(hi) <= 0.0 {
        return 50.0;
    }
    Executor::new(eq, BrentRoot::new(lo, hi, 1e-10))
        .configure(|st| st.param(0.0).max_iters(200))
        .run()
        .ok()
        .and_then(|r| r.state().best_param)
        .map(f64::exp)
        .unwrap_or(1.0)
}

/// A 3-parameter Weibull distribution.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Weibull3 {
    /// The 2-parameter Weibull of the age beyond the location.
    pub beyond: Weibull,
    /// Location gamma: failure-free period.
    pub location: f64,
}

impl Weibull3 {
    /// A 3-parameter Weibull; shape and scale finite and positive, location finite.
    pub fn new(shape: f64, scale: f64, location: f64) -> LifeResult<Self> {
        Ok(Weibull3 {
            beyond: Weibull::new(shape, scale)?,
            location: finite("location", location)?,
        })
    }
}

impl LifeDistribution for Weibull3 {
    fn family(&self) -> &'static Family {
        &FAMILY
    }

    fn params(&self) -> Vec<f64> {
        vec![self.beyond.shape, self.beyond.scale, self.location]
    }

    /// H(t) = ((t - gamma)/eta)^beta beyond gamma, 0 before.
    fn cum_hazard(&self, t: f64) -> f64 {
        if t <= self.location {
            0.0
        } else {
            self.beyond.cum_hazard(t - self.location)
        }
    }

    /// ln f(t) = Weibull ln f(t - gamma); -inf before gamma, and -inf where
    /// (t - gamma)/eta overflows (the Weibull form would give inf - inf).
    fn ln_pdf(&self, t: f64) -> f64 {
        if t < self.location || ((t - self.location) / self.beyond.scale).is_infinite() {
            f64::NEG_INFINITY
        } else {
            self.beyond.ln_pdf(t - self.location)
        }
    }

    /// h(t) = (beta/eta)((t - gamma)/eta)^(beta - 1) beyond gamma, 0 before.
    fn hazard(&self, t: f64) -> f64 {
        if t < self.location {
            0.0
        } else {
            self.beyond.hazard(t - self.location)
        }
    }

    /// t_p = gamma + eta (-ln(1 - p))^(1/beta); t_0 = gamma.
    fn quantile(&self, p: f64) -> f64 {
        if !(0.0..=1.0).contains(&p) {
            return f64::NAN;
        }
        self.location + self.beyond.quantile(p)
    }

    /// mean = gamma + eta Gamma(1 + 1/beta)
    fn mean(&self) -> f64 {
        self.location + self.beyond.mean()
    }

    /// integral_0^t R = min(t, gamma) + W(t - gamma) for gamma >= 0, where
    /// W(s) = eta Gamma(1 + 1/beta) P(1/beta, (s/eta)^beta) is the Weibull
    /// integral (zero for s <= 0). For gamma < 0 it is W(t - gamma) - W(-gamma),
    /// integrated numerically where that difference cancels.
    fn sf_integral(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        let g = self.location;
        if g >= 0.0 {
            return t.min(g) + self.beyond.sf_integral(t - g);
        }
        let (hi, lo) = (self.beyond.sf_integral(t - g), self.beyond.sf_integral(-g));
        let diff = hi - lo;
        if diff.is_finite() && hi > CANCELLATION * diff {
            numerics::integrate(|u| self.sf(u), 0.0, t, 1e-15)
        } else {
            diff
        }
    }

    /// H(a + h) - H(a): the Weibull's cancellation-free increment at the age
    /// beyond gamma; before gamma nothing has accumulated.
    fn cum_hazard_increment(&self, age: f64, horizon: f64) -> f64 {
        let s = age - self.location;
        if s >= 0.0 {
            self.beyond.cum_hazard_increment(s, horizon)
        } else {
            self.cum_hazard(age + horizon)
        }
    }
}
