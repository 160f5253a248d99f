//! Replacement economics for planners: the age-replacement cost curve and a
//! verdict on it, the availability-optimal replacement age, and block
//! replacement to compare with.
//!
//! Long-run rates per unit of usage (renewal-reward: the expected cost of
//! one cycle over its expected length). With R the reliability, F = 1 - R
//! and U(T) = integral_0^T R (the mean usage of one unit replaced at age T):
//!
//! * age replacement (each unit at age T or at failure):
//!   C(T) = (cp R(T) + cf F(T)) / U(T);
//! * availability under age replacement, with planned and unplanned
//!   downtimes tp and tf per replacement:
//!   A(T) = U(T) / (U(T) + tp R(T) + tf F(T));
//! * block replacement (all units at fixed intervals T, failures replaced
//!   in between), with M the renewal function ([`super::renewal`]):
//!   C_b(T) = (cp + cf M(T)) / T.
//!
//! Running to failure costs cf / mean per unit of usage: the limit of C(T)
//! and of C_b(T) as T grows.

use super::renewal::{renewal_curve, renewal_function};
use super::{age_replacement_cost_rate, check_costs, optimal_replacement_age};
use crate::dist::LifeDistribution;
use crate::error::{show_number, LifeError, LifeResult};
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentOpt;

/// How far beyond the largest observed age an optimum is still reported by
/// [`age_replacement_verdict`] when the caller has no view of its own.
pub const DEFAULT_BEYOND_FACTOR: f64 = 3.0;

/// The age-replacement cost rate at one replacement age, split into its
/// planned and unplanned parts (all per unit of usage).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CostPoint {
    /// Replacement age T.
    pub age: f64,
    /// cp R(T) / U(T): planned replacements.
    pub planned_rate: f64,
    /// cf F(T) / U(T): replacements after failure.
    pub unplanned_rate: f64,
    /// The sum: the cost rate C(T).
    pub total_rate: f64,
}

/// The age-replacement cost rate and its planned and unplanned parts at each
/// of `ages` (each a finite number > 0), for a cost chart.
pub fn age_replacement_curve(
    d: &dyn LifeDistribution,
    cost_planned: f64,
    cost_failure: f64,
    ages: &[f64],
) -> LifeResult<Vec<CostPoint>> {
    check_costs(cost_planned, cost_failure)?;
    ages.iter()
        .map(|&t| {
            positive_age("age", t)?;
            let usage = d.sf_integral(t);
            let planned_rate = cost_planned * d.sf(t) / usage;
            let unplanned_rate = cost_failure * d.cdf(t) / usage;
            Ok(CostPoint {
                age: t,
                planned_rate,
                unplanned_rate,
                total_rate: planned_rate + unplanned_rate,
            })
        })
        .collect()
}

/// Whether age replacement pays, and by how much.
#[derive(Debug, Clone, PartialEq)]
pub struct Verdict {
    /// The replacement age minimising the cost rate; None when replacing
    /// before failure does not pay or the optimum cannot be trusted
    /// (`reason` says which).
    pub optimum: Option<f64>,
    /// The cost rate at the optimum; the run-to-failure rate when there is
    /// no optimum (the best that is then achievable).
    pub cost_rate_at_optimum: f64,
    /// cf / mean life: the cost rate of running every unit to failure.
    pub run_to_failure_rate: f64,
    /// 1 - cost_rate_at_optimum / run_to_failure_rate: the share of the
    /// run-to-failure cost that planned replacement saves; 0 when no optimum.
    pub saving: f64,
    /// Why there is no optimum; None when there is one.
    pub reason: Option<String>,
}

/// The age-replacement optimum with its cost rate, the run-to-failure rate
/// and the saving, or the reason replacing early does not pay.
///
/// When `largest_observed_age` is given and the optimum lies beyond
/// `beyond_factor` times it ([`DEFAULT_BEYOND_FACTOR`] is 3), the optimum is
/// withheld: the model would be read far outside its data. Costs are checked
/// as for [`optimal_replacement_age`]; `largest_observed_age` must be a
/// finite number > 0 and `beyond_factor` a finite number >= 1.
pub fn age_replacement_verdict(
    d: &dyn LifeDistribution,
    cost_planned: f64,
    cost_failure: f64,
    largest_observed_age: Option<f64>,
    beyond_factor: f64,
) -> LifeResult<Verdict> {
    check_costs(cost_planned, cost_failure)?;
    if let Some(a) = largest_observed_age {
        positive_age("largest_observed_age", a)?;
    }
    if !(beyond_factor.is_finite() && beyond_factor >= 1.0) {
        return Err(LifeError::bad(
            "beyond_factor",
            "must be a finite number >= 1",
            show_number(beyond_factor),
        ));
    }
    let mean = d.mean();
    if mean.is_nan() || mean <= 0.0 {
        return Err(LifeError::NotEstimable(format!(
            "the model's mean life is {}, so running to failure has no cost rate",
            show_number(mean)
        )));
    }
    let run_to_failure_rate = cost_failure / mean; // 0 for an infinite mean
    let without = |reason: String| Verdict {
        optimum: None,
        cost_rate_at_optimum: run_to_failure_rate,
        run_to_failure_rate,
        saving: 0.0,
        reason: Some(reason),
    };
    let Some(t) = optimal_replacement_age(d, cost_planned, cost_failure)? else {
        return Ok(without(no_optimum_reason(d)));
    };
    if let Some(a) = largest_observed_age {
        let limit = beyond_factor * a;
        if t > limit {
            return Ok(without(format!(
                "the optimum lies beyond {} times the largest observed age ({}), \
                 too far from the data to trust",
                show_number(beyond_factor),
                show_number(limit)
            )));
        }
    }
    let rate = age_replacement_cost_rate(d, cost_planned, cost_failure, t);
    if rate.is_nan() || rate >= run_to_failure_rate {
        // The first-order condition found a local minimum only: the hazard
        // falls again later and running to failure is cheaper still.
        return Ok(without(
            "no replacement age beats running to failure: the hazard rises and then \
             falls again"
                .to_string(),
        ));
    }
    Ok(Verdict {
        optimum: Some(t),
        cost_rate_at_optimum: rate,
        run_to_failure_rate,
        saving: 1.0 - rate / run_to_failure_rate,
        reason: None,
    })
}

/// Why [`optimal_replacement_age`] found no optimum, in the planner's words.
fn no_optimum_reason(d: &dyn LifeDistribution) -> String {
    let family = d.family();
    let params = d.params();
    if family.name == "exponential" {
        return "hazard does not rise (constant failure rate)".to_string();
    }
    if let Some(i) = family.param_index("shape") {
        // Weibull, 3-parameter Weibull, gamma and log-logistic: the hazard
        // falls or stays level for shape <= 1.
        if params[i] <= 1.0 {
            return "hazard does not rise (shape <= 1)".to_string();
        }
    }
    let probes = [0.01, 0.1, 0.3, 0.5, 0.7, 0.9, 0.99];
    let rises = probes
        .windows(2)
        .any(|w| d.hazard(d.quantile(w[1])) > d.hazard(d.quantile(w[0])));
    let falls = probes
        .windows(2)
        .any(|w| d.hazard(d.quantile(w[1])) < d.hazard(d.quantile(w[0])));
    if rises && falls {
        "no replacement age beats running to failure: the hazard rises and then falls again"
            .to_string()
    } else if rises {
        "the hazard does not rise enough: the cost rate keeps falling until virtually \
         every unit has failed"
            .to_string()
    } else {
        "hazard does not rise".to_string()
    }
}

/// Availability of a position under age replacement at age `t`:
/// U(t) / (U(t) + tp R(t) + tf F(t)), the long-run share of time in service
/// when a planned replacement takes `downtime_planned` and one after a
/// failure `downtime_failure` (both in the units of age). NaN unless
/// `t` >= 0 and the downtimes are >= 0 (all finite); 0 at t = 0.
pub fn availability(
    d: &dyn LifeDistribution,
    downtime_planned: f64,
    downtime_failure: f64,
    t: f64,
) -> f64 {
    let valid = |v: f64| v.is_finite() && v >= 0.0;
    if !(valid(downtime_planned) && valid(downtime_failure) && valid(t)) {
        return f64::NAN;
    }
    let usage = d.sf_integral(t);
    usage / (usage + downtime_planned * d.sf(t) + downtime_failure * d.cdf(t))
}

/// The age-replacement interval that maximises availability, or None where
/// replacing early never raises it (as for the cost optimum).
///
/// 1/A(T) - 1 = (tp R(T) + tf F(T)) / U(T) is the age-replacement cost rate
/// with the costs replaced by the downtimes, and A = 1 / (1 + that) falls
/// strictly as it rises, so the availability optimum is exactly the cost
/// optimum at costs (tp, tf): this calls [`optimal_replacement_age`].
/// `downtime_planned` must be a finite number > 0 and `downtime_failure`
/// must exceed it.
pub fn availability_optimum(
    d: &dyn LifeDistribution,
    downtime_planned: f64,
    downtime_failure: f64,
) -> LifeResult<Option<f64>> {
    for (arg, v) in [
        ("downtime_planned", downtime_planned),
        ("downtime_failure", downtime_failure),
    ] {
        if !(v.is_finite() && v > 0.0) {
            return Err(LifeError::bad(
                arg,
                "must be a finite number > 0",
                show_number(v),
            ));
        }
    }
    if downtime_failure <= downtime_planned {
        return Err(LifeError::BadArgument {
            arg: "downtime_failure",
            expected: "must exceed downtime_planned (otherwise replacing early never pays)",
            got: format!(
                "{} with downtime_planned {}",
                show_number(downtime_failure),
                show_number(downtime_planned)
            ),
        });
    }
    optimal_replacement_age(d, downtime_planned, downtime_failure)
}

/// Block-replacement cost rate (cp + cf M(t)) / t: every unit replaced at
/// fixed intervals `t` (a finite number > 0) at cost cp each, failures in
/// between at cost cf each. Costs are checked as for the age policy.
pub fn block_replacement_rate(
    d: &dyn LifeDistribution,
    cost_planned: f64,
    cost_failure: f64,
    t: f64,
) -> LifeResult<f64> {
    check_costs(cost_planned, cost_failure)?;
    positive_age("t", t)?;
    Ok((cost_planned + cost_failure * renewal_function(d, t)?) / t)
}

/// Grid points per halving of the interval when bracketing the block optimum.
const POINTS_PER_HALVING: usize = 4;
/// The bracketing grid first spans [max_t / 2^10, max_t] ...
const FIRST_HALVINGS: usize = 10;
/// ... and is extended downwards, up to max_t / 2^60, while its minimum
/// sits at its lower end.
const MAX_HALVINGS: usize = 60;

/// The block-replacement interval in (0, `max_t`] with the lowest cost rate,
/// and that rate; None when there is no finite optimum: the rate is lowest
/// at `max_t` (it keeps falling, as it does when the hazard does not rise),
/// or its lowest interior value does not beat running to failure
/// (cost_failure / mean life, the limit for long intervals).
///
/// The rate is evaluated on a logarithmic grid (4 points per halving) to
/// bracket its lowest point, which argmin's Brent minimiser then refines;
/// where the rate has several dips (peaked life distributions), the lowest
/// on the grid is taken.
pub fn block_replacement_optimum(
    d: &dyn LifeDistribution,
    cost_planned: f64,
    cost_failure: f64,
    max_t: f64,
) -> LifeResult<Option<(f64, f64)>> {
    check_costs(cost_planned, cost_failure)?;
    positive_age("max_t", max_t)?;
    let rate = |t: f64, m: f64| (cost_planned + cost_failure * m) / t;
    let age_at = |k: usize| max_t * (-(k as f64) / POINTS_PER_HALVING as f64).exp2();
    // ages[k] = max_t 2^(-k/4), descending.
    let mut ages: Vec<f64> = (0..=FIRST_HALVINGS * POINTS_PER_HALVING)
        .map(age_at)
        .collect();
    let mut rates: Vec<f64> = ages
        .iter()
        .zip(renewal_curve(d, &ages)?)
        .map(|(&t, m)| rate(t, m))
        .collect();
    let lowest = |rates: &[f64]| {
        (0..rates.len())
            .min_by(|&i, &j| rates[i].total_cmp(&rates[j]))
            .unwrap_or(0)
    };
    let mut best = lowest(&rates);
    while best + 1 == ages.len() && ages.len() <= MAX_HALVINGS * POINTS_PER_HALVING {
        let more: Vec<f64> = (ages.len()..ages.len() + POINTS_PER_HALVING * 10)
            .map(age_at)
            .filter(|&t| t > 0.0)
            .collect();
        if more.is_empty() {
            break;
        }
        let ms = renewal_curve(d, &more)?;
        rates.extend(more.iter().zip(ms).map(|(&t, m)| rate(t, m)));
        ages.extend(more);
        best = lowest(&rates);
    }
    if rates[best].is_nan() {
        return Err(LifeError::NoConvergence(
            "block replacement: the cost rate is not a number on the search grid".into(),
        ));
    }
    if best == 0 || best + 1 == ages.len() {
        return Ok(None); // lowest at an end of the bracket: no finite optimum
    }
    let problem = BlockRate {
        d,
        cost_planned,
        cost_failure,
        unit: max_t,
    };
    // Ages descend: the neighbours bracket the grid minimum. The search runs
    // on T / max_t so that its parabola fits cannot overflow for huge ages.
    let (lo, hi) = (ages[best + 1] / max_t, ages[best - 1] / max_t);
    let solver = BrentOpt::new(lo, hi).set_tolerance(1e-7, lo * 1e-12);
    let result = Executor::new(problem, solver)
        .configure(|s| s.max_iters(200))
        .run()
        .map_err(|e| {
            LifeError::NoConvergence(format!("block replacement interval search failed: {e}"))
        })?;
    let state = result.state();
    let (t, c) = match state.best_param {
        Some(s) if state.best_cost <= rates[best] => (s * max_t, state.best_cost),
        _ => (ages[best], rates[best]),
    };
    let run_to_failure = cost_failure / d.mean();
    Ok((c < run_to_failure).then_some((t, c)))
}

/// The block-replacement cost rate as argmin's cost function of the
/// interval in units of `unit`.
struct BlockRate<'a> {
    d: &'a dyn LifeDistribution,
    cost_planned: f64,
    cost_failure: f64,
    unit: f64,
}

impl CostFunction for BlockRate<'_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, s: &f64) -> Result<f64, argmin::core::Error> {
        let t = s * self.unit;
        let m = renewal_function(self.d, t)?;
        Ok((self.cost_planned + self.cost_failure * m) / t)
    }
}

/// Checks that an age argument is a finite number > 0.
fn positive_age(arg: &'static str, t: f64) -> LifeResult<()> {
    if t.is_finite() && t > 0.0 {
        Ok(())
    } else {
        Err(LifeError::bad(
            arg,
            "must be a finite number > 0",
            show_number(t),
        ))
    }
}
