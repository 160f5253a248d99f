//! Lognormal distribution: the log of the life is normal.
//!
//! R(t) = 1 - Phi((ln t - mu)/sigma), with mu and sigma the mean and standard
//! deviation of ln t (the median life is exp(mu)). Common for fatigue and
//! wear-out with a long right tail.

use super::numerics::{self, ln_norm_cdf, ln_norm_sf, norm_cdf, norm_hazard, norm_quantile};
use super::{finite, positive, Family, LifeDistribution, Linearisation, ParamInfo, ParamKind};
use crate::error::LifeResult;
use std::f64::consts::PI;

/// The lognormal family entry for [`super::FAMILIES`].
pub static FAMILY: Family = Family {
    name: "lognormal",
    title: "lognormal: R(t) = 1 - Phi((ln t - mu)/sigma)",
    params: &[
        ParamInfo {
            name: "mu",
            meaning: "mean of ln t; exp(mu) is the median life",
            kind: ParamKind::Real,
        },
        ParamInfo {
            name: "sigma",
            meaning: "standard deviation of ln t (spread of the lives)",
            kind: ParamKind::Positive,
        },
    ],
    build: |p| Ok(Box::new(Lognormal::new(p[0], p[1])?)),
    // The ML estimates for complete data are the mean and sd of ln t.
    start: |s| {
        let mu = if s.mean_ln.is_finite() {
            s.mean_ln
        } else {
            0.0
        };
        let sigma = if s.sd_ln.is_finite() && s.sd_ln > 0.0 {
            s.sd_ln
        } else {
            1.0
        };
        vec![mu, sigma]
    },
    pinned: 0,
    // t_p = exp(mu + sigma z_p)  =>  mu = ln t - sigma z_p
    pin_quantile: |p, prob, t| {
        if !(prob > 0.0 && prob < 1.0) {
            return None; // no age pins F = 0 or F = 1
        }
        let mu = t.ln() - p[1] * norm_quantile(prob);
        mu.is_finite().then(|| vec![mu, p[1]])
    },
    // Phi^-1(F) = (ln t - mu)/sigma: slope 1/sigma, intercept -mu/sigma.
    linear: Some(Linearisation {
        x: f64::ln,
        y: norm_quantile,
        y_inv: norm_cdf,
        through_origin: false,
        params: |a, b| {
            let (mu, sigma) = (-a / b, 1.0 / b);
            (b > 0.0 && mu.is_finite() && sigma.is_finite()).then(|| vec![mu, sigma])
        },
    }),
};

/// A lognormal distribution: ln t is normal with mean `mu` and sd `sigma`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lognormal {
    /// Mean of ln t.
    pub mu: f64,
    /// Standard deviation of ln t, > 0.
    pub sigma: f64,
}

impl Lognormal {
    /// A lognormal distribution; mu finite, sigma finite and positive.
    pub fn new(mu: f64, sigma: f64) -> LifeResult<Self> {
        Ok(Lognormal {
            mu: finite("mu", mu)?,
            sigma: positive("sigma", sigma)?,
        })
    }

    /// Standardised log-age z = (ln t - mu)/sigma.
    fn z(&self, t: f64) -> f64 {
        (t.ln() - self.mu) / self.sigma
    }
}

impl LifeDistribution for Lognormal {
    fn family(&self) -> &'static Family {
        &FAMILY
    }

    fn params(&self) -> Vec<f64> {
        vec![self.mu, self.sigma]
    }

    /// H(t) = -ln(1 - Phi(z))
    fn cum_hazard(&self, t: f64) -> f64 {
        -ln_norm_sf(self.z(t))
    }

    /// ln f(t) = -ln(t sigma sqrt(2 pi)) - z^2/2
    fn ln_pdf(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return f64::NEG_INFINITY;
        }
        let z = self.z(t);
        -(t * self.sigma).ln() - 0.5 * (2.0 * PI).ln() - 0.5 * z * z
    }

    /// h(t) = f(t) / R(t) = phi(z) / (t sigma (1 - Phi(z))), the ratio formed
    /// without the tails themselves (see [`numerics::norm_hazard`]).
    fn hazard(&self, t: f64) -> f64 {
        if t <= 0.0 || t == f64::INFINITY {
            return 0.0; // h(0) = 0 and h(t) -> 0 as t grows
        }
        norm_hazard(self.z(t)) / (t * self.sigma)
    }

    /// t_p = exp(mu + sigma z_p), z_p = Phi^-1(p)
    fn quantile(&self, p: f64) -> f64 {
        // norm_quantile is NaN outside [0, 1]
        (self.mu + self.sigma * norm_quantile(p)).exp()
    }

    /// mean = exp(mu + sigma^2/2)
    fn mean(&self) -> f64 {
        (self.mu + 0.5 * self.sigma * self.sigma).exp()
    }

    /// integral_0^t R = E[min(T, t)]
    ///   = exp(mu + sigma^2/2) Phi(z - sigma) + t R(t)
    /// (partial expectation plus the survivors); both terms are positive,
    /// and the first is formed in logs so it neither overflows nor underflows
    /// early.
    fn sf_integral(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        if t == f64::INFINITY {
            return self.mean();
        }
        let z = self.z(t);
        let partial = (self.mu + 0.5 * self.sigma * self.sigma + ln_norm_cdf(z - self.sigma)).exp();
        partial + t * self.sf(t)
    }

    /// H(a + h) - H(a), integrating the hazard where the plain difference
    /// cancels (see [`numerics::cum_hazard_increment`]).
    fn cum_hazard_increment(&self, age: f64, horizon: f64) -> f64 {
        numerics::cum_hazard_increment(|t| self.cum_hazard(t), |t| self.hazard(t), age, horizon)
    }
}
