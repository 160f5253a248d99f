//! Maintenance decisions read off a model: when to replace before failure.
//!
//! Works on any [`LifeDistribution`]; knows nothing of SQL.

pub mod forecast;
pub mod policy;
pub mod renewal;

use crate::dist::LifeDistribution;
use crate::error::{show_number, LifeError, LifeResult};
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentRoot;

/// Long-run cost per unit of usage when every unit is replaced at age `t`
/// or at failure, whichever comes first:
/// C(T) = (cp R(T) + cf F(T)) / integral_0^T R(u) du.
pub fn age_replacement_cost_rate(
    d: &dyn LifeDistribution,
    cost_planned: f64,
    cost_failure: f64,
    t: f64,
) -> f64 {
    (cost_planned * d.sf(t) + cost_failure * d.cdf(t)) / d.sf_integral(t)
}

/// Checks a pair of replacement costs.
pub fn check_costs(cost_planned: f64, cost_failure: f64) -> LifeResult<()> {
    for (arg, v) in [
        ("cost_planned", cost_planned),
        ("cost_failure", cost_failure),
    ] {
        if !(v.is_finite() && v > 0.0) {
            return Err(LifeError::bad(
                arg,
                "must be a finite number > 0",
                show_number(v),
            ));
        }
    }
    if cost_failure <= cost_planned {
        return Err(LifeError::BadArgument {
            arg: "cost_failure",
            expected: "must exceed cost_planned (otherwise replacing early never pays)",
            got: format!(
                "{} with cost_planned {}",
                show_number(cost_failure),
                show_number(cost_planned)
            ),
        });
    }
    Ok(())
}

/// First-order condition of the age-replacement optimum:
/// phi(T) = h(T) integral_0^T R - F(T) - cp / (cf - cp), zero at the optimum.
/// For an increasing hazard phi increases from -cp/(cf-cp), so the root is
/// the unique minimum of the cost rate.
struct Optimality<'a> {
    d: &'a dyn LifeDistribution,
    ratio: f64,
}

impl Optimality<'_> {
    fn phi(&self, t: f64) -> f64 {
        if t <= 0.0 {
            return -self.ratio;
        }
        self.d.hazard(t) * self.d.sf_integral(t) - self.d.cdf(t) - self.ratio
    }
}

impl CostFunction for Optimality<'_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, t: &f64) -> Result<f64, argmin::core::Error> {
        Ok(self.phi(*t))
    }
}

/// Beyond this cumulative hazard (reliability below about 1e-304) replacing
/// at age T is indistinguishable from running to failure.
const MAX_CUM_HAZARD: f64 = 700.0;

/// The age-replacement interval minimising the long-run cost per unit of
/// usage, or `None` when no finite optimum exists (a hazard that does not
/// rise enough: e.g. Weibull shape <= 1) or the optimum lies where virtually
/// every unit has already failed (reliability below about 1e-304).
pub fn optimal_replacement_age(
    d: &dyn LifeDistribution,
    cost_planned: f64,
    cost_failure: f64,
) -> LifeResult<Option<f64>> {
    check_costs(cost_planned, cost_failure)?;
    let problem = Optimality {
        d,
        ratio: cost_planned / (cost_failure - cost_planned),
    };
    // Bracket the root: phi(0) < 0; walk up from the median until phi > 0.
    let mut lo = 0.0;
    let mut hi = d.quantile(0.5);
    if !(hi.is_finite() && hi > 0.0) {
        // A model so extreme that its median is not a positive number has no
        // usable optimum (and doubling from zero would never end).
        return Ok(None);
    }
    // Doubling from a positive double reaches infinity (then phi is NaN or
    // the cumulative hazard exceeds the limit) in at most ~2100 steps.
    for _ in 0..4096 {
        let f = problem.phi(hi);
        if f.is_nan() {
            return Ok(None);
        }
        if f > 0.0 {
            break;
        }
        if d.cum_hazard(hi) > MAX_CUM_HAZARD {
            return Ok(None);
        }
        lo = hi;
        hi *= 2.0;
    }
    if problem.phi(hi).is_nan() || problem.phi(hi) <= 0.0 {
        return Ok(None);
    }
    let solver = BrentRoot::new(lo, hi, 0.0);
    let result = Executor::new(problem, solver)
        .configure(|s| s.param(hi).max_iters(400))
        .run()
        .map_err(|e| LifeError::NoConvergence(format!("replacement age search failed: {e}")))?;
    let t = result
        .state()
        .best_param
        .ok_or_else(|| LifeError::NoConvergence("replacement age search found no root".into()))?;
    // Where the hazard rises and then falls (lognormal, log-logistic) the
    // first root is only a local minimum; if it costs no less than running
    // to failure (cf / mean, zero for an infinite mean), replacement does
    // not pay at any age.
    let run_to_failure = cost_failure / d.mean();
    if age_replacement_cost_rate(d, cost_planned, cost_failure, t) >= run_to_failure {
        return Ok(None);
    }
    Ok(Some(t))
}
