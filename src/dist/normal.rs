//! Normal distribution of the life, as used in the trade for wear-out with a
//! small spread about the mean.
//!
//! R(t) = 1 - Phi((t - mu)/sigma) on ages t >= 0, with mu and sigma the mean
//! and standard deviation of the life. The probability Phi(-mu/sigma) that
//! the normal law puts below age 0 is *not* renormalised away: R(0) =
//! 1 - Phi(-mu/sigma) < 1, so F(0) > 0, and `quantile` returns the plain
//! formula mu + sigma z_p, which is negative for p < Phi(-mu/sigma) (and -inf
//! at p = 0). `mean` is mu. The family suits lives with mu several sigma
//! above 0, where all of this is invisible; `sf_integral` is the exact
//! integral of this R from 0, so for large t it tends to
//! mu Phi(mu/sigma) + sigma phi(mu/sigma), which equals mu only in that case.

use super::numerics::{
    self, ln_norm_sf, norm_cdf, norm_hazard, norm_pdf, norm_quantile, norm_sf, CANCELLATION,
};
use super::{finite, positive, Family, LifeDistribution, Linearisation, ParamInfo, ParamKind};
use crate::error::LifeResult;
use std::f64::consts::PI;

/// The normal family entry for [`super::FAMILIES`].
pub static FAMILY: Family = Family {
    name: "normal",
    title: "normal: R(t) = 1 - Phi((t - mu)/sigma)",
    params: &[
        ParamInfo {
            name: "mu",
            meaning: "mean life",
            kind: ParamKind::Real,
        },
        ParamInfo {
            name: "sigma",
            meaning: "standard deviation of the life",
            kind: ParamKind::Positive,
        },
    ],
    build: |p| Ok(Box::new(Normal::new(p[0], p[1])?)),
    // The ML estimates for complete data: mean and sd of the ages.
    start: |s| {
        let mu = if s.mean.is_finite() { s.mean } else { 0.0 };
        let sigma = if s.sd.is_finite() && s.sd > 0.0 {
            s.sd
        } else {
            (0.1 * mu.abs()).max(1.0)
        };
        vec![mu, sigma]
    },
    pinned: 0,
    // t_p = mu + sigma z_p  =>  mu = t - sigma z_p
    pin_quantile: |p, prob, t| {
        if !(prob > 0.0 && prob < 1.0) {
            return None; // no age pins F = 0 or F = 1
        }
        let mu = t - p[1] * norm_quantile(prob);
        mu.is_finite().then(|| vec![mu, p[1]])
    },
    // Phi^-1(F) = (t - mu)/sigma: slope 1/sigma, intercept -mu/sigma.
    linear: Some(Linearisation {
        x: |t| t,
        y: norm_quantile,
        y_inv: norm_cdf,
        through_origin: false,
        params: |a, b| {
            let (mu, sigma) = (-a / b, 1.0 / b);
            (b > 0.0 && mu.is_finite() && sigma.is_finite()).then(|| vec![mu, sigma])
        },
    }),
};

/// A normal life distribution with mean `mu` and standard deviation `sigma`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Normal {
    /// Mean life.
    pub mu: f64,
    /// Standard deviation of the life, > 0.
    pub sigma: f64,
}

impl Normal {
    /// A normal distribution; mu finite, sigma finite and positive.
    pub fn new(mu: f64, sigma: f64) -> LifeResult<Self> {
        Ok(Normal {
            mu: finite("mu", mu)?,
            sigma: positive("sigma", sigma)?,
        })
    }

    /// Standardised age z = (t - mu)/sigma.
    fn z(&self, t: f64) -> f64 {
        (t - self.mu) / self.sigma
    }
}

/// Standard normal loss function E[(Z - z)+] = phi(z) - z (1 - Phi(z)).
fn upper_loss(z: f64) -> f64 {
    norm_pdf(z) - z * norm_sf(z)
}

/// E[(z - Z)+] = phi(z) + z Phi(z).
fn lower_loss(z: f64) -> f64 {
    norm_pdf(z) + z * norm_cdf(z)
}

impl LifeDistribution for Normal {
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

    /// ln f(t) = -ln(sigma sqrt(2 pi)) - z^2/2
    fn ln_pdf(&self, t: f64) -> f64 {
        let z = self.z(t);
        -self.sigma.ln() - 0.5 * (2.0 * PI).ln() - 0.5 * z * z
    }

    /// h(t) = f(t) / R(t) = phi(z) / (sigma (1 - Phi(z))), the ratio formed
    /// without the tails themselves (see [`numerics::norm_hazard`]).
    fn hazard(&self, t: f64) -> f64 {
        norm_hazard(self.z(t)) / self.sigma
    }

    /// t_p = mu + sigma z_p, z_p = Phi^-1(p) (negative for p < Phi(-mu/sigma)).
    fn quantile(&self, p: f64) -> f64 {
        self.mu + self.sigma * norm_quantile(p)
    }

    /// mean = mu
    fn mean(&self) -> f64 {
        self.mu
    }

    /// integral_0^t R = sigma [L(z0) - L(z1)] = t - sigma [M(z1) - M(z0)],
    /// z0 = -mu/sigma, z1 = (t - mu)/sigma, with the loss functions
    /// L(z) = E[(Z - z)+] = phi(z) - z(1 - Phi(z)) and
    /// M(z) = E[(z - Z)+] = phi(z) + z Phi(z). The form with the smaller
    /// rounding is used; where both cancel (t much shorter than sigma, with
    /// mu not many sigma above 0) the reliability is integrated numerically.
    fn sf_integral(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return 0.0;
        }
        let (s, z0) = (self.sigma, -self.mu / self.sigma);
        let z1 = self.z(t);
        if z1 > 40.0 {
            // L(z1) < phi(40) / 40^2 underflows: all of the integral is in.
            return s * upper_loss(z0);
        }
        // Rounding scale of each form: the sizes of the terms it adds.
        let size_upper = s * (norm_pdf(z0) + (z0 * norm_sf(z0)).abs())
            + s * (norm_pdf(z1) + (z1 * norm_sf(z1)).abs());
        let size_lower = t
            + s * (norm_pdf(z0) + (z0 * norm_cdf(z0)).abs())
            + s * (norm_pdf(z1) + (z1 * norm_cdf(z1)).abs());
        let (value, size) = if size_upper <= size_lower {
            (s * (upper_loss(z0) - upper_loss(z1)), size_upper)
        } else {
            (t - s * (lower_loss(z1) - lower_loss(z0)), size_lower)
        };
        if size > CANCELLATION * value.abs() {
            numerics::integrate(|u| self.sf(u), 0.0, t, 1e-15)
        } else {
            value
        }
    }

    /// H(a + h) - H(a), integrating the hazard where the plain difference
    /// cancels (see [`numerics::cum_hazard_increment`]).
    fn cum_hazard_increment(&self, age: f64, horizon: f64) -> f64 {
        numerics::cum_hazard_increment(|t| self.cum_hazard(t), |t| self.hazard(t), age, horizon)
    }
}
