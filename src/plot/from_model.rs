//! Pictures straight from a model value: the probability plot of the data
//! kept in the model with its fitted line and Fisher band, and the
//! age-replacement cost curve. The SQL picture functions call these.

use super::{cost_curve_svg, probability_plot_svg, CostCurve, ProbabilityPlot};
use crate::decide::{age_replacement_cost_rate, optimal_replacement_age};
use crate::error::{LifeError, LifeResult};
use crate::fit::bounds::{bound, BoundMethod, Level, Quantity, Side};
use crate::fit::rank;
use crate::model::Model;

/// The probability plot of a model fitted with `keep_sample`, with a
/// two-sided Fisher band at `conf` when the model has a covariance.
pub fn model_probability_svg(
    m: &Model,
    title: &str,
    age_label: &str,
    conf: f64,
) -> LifeResult<String> {
    let obs = m
        .fit
        .as_ref()
        .and_then(|f| f.sample.as_ref())
        .ok_or_else(|| {
            LifeError::NotEstimable(
                "the plot needs the data: fit with options {\"keep_sample\": true}".into(),
            )
        })?;
    let level = Level::new(conf, 2)?;
    let failures: Vec<(f64, f64)> = rank::plotting_positions(obs, rank::Positions::Bernard)?
        .iter()
        .map(|p| (p.age, p.unreliability))
        .collect();
    let suspensions: Vec<f64> = obs
        .iter()
        .filter(|o| !o.failed())
        .flat_map(|o| std::iter::repeat_n(o.earliest, (o.count as usize).min(10_000)))
        .collect();
    let has_cov = m.fit.as_ref().is_some_and(|f| !f.cov.is_empty());
    let band = if has_cov {
        let (lo, hi) = obs
            .iter()
            .map(|o| o.earliest)
            .filter(|t| *t > 0.0)
            .fold((f64::INFINITY, 0.0f64), |(a, b), t| (a.min(t), b.max(t)));
        if hi > lo {
            let (from, to) = (lo / 2.0, hi * 2.0);
            let mut rows = Vec::new();
            for i in 0..=60 {
                let t = (from.ln() + (to.ln() - from.ln()) * i as f64 / 60.0).exp();
                let q = Quantity::Reliability(t);
                let r_lo = bound(m, q, level, BoundMethod::Fisher, Side::Lower);
                let r_hi = bound(m, q, level, BoundMethod::Fisher, Side::Upper);
                if let (Ok(a), Ok(b)) = (r_lo, r_hi) {
                    rows.push((t, 1.0 - b, 1.0 - a));
                }
            }
            Some(rows)
        } else {
            None
        }
    } else {
        None
    };
    probability_plot_svg(&ProbabilityPlot {
        title: title.to_string(),
        family: m.dist.family(),
        model: m.dist.as_ref(),
        failures,
        suspensions,
        band,
        age_label: age_label.to_string(),
    })
}

/// The age-replacement cost curve of a model for two costs, with the
/// optimum marked and the run-to-failure rate for comparison.
pub fn model_cost_svg(
    m: &Model,
    cost_planned: f64,
    cost_failure: f64,
    title: &str,
    age_label: &str,
) -> LifeResult<String> {
    let d = m.dist.as_ref();
    let optimum = optimal_replacement_age(d, cost_planned, cost_failure)?;
    let end = match optimum {
        Some(t) => (3.0 * t).max(d.quantile(0.9)),
        None => d.quantile(0.99),
    };
    if !(end.is_finite() && end > 0.0) {
        return Err(LifeError::NotEstimable(
            "the model's ages are out of range for a cost curve".into(),
        ));
    }
    let points = (1..=200)
        .map(|i| {
            let t = end * i as f64 / 200.0;
            let denom = d.sf_integral(t);
            (
                t,
                cost_planned * d.sf(t) / denom,
                cost_failure * d.cdf(t) / denom,
                age_replacement_cost_rate(d, cost_planned, cost_failure, t),
            )
        })
        .collect();
    let mean = d.mean();
    cost_curve_svg(&CostCurve {
        title: title.to_string(),
        points,
        optimum: optimum.map(|t| {
            (
                t,
                age_replacement_cost_rate(d, cost_planned, cost_failure, t),
            )
        }),
        run_to_failure_rate: (mean.is_finite() && mean > 0.0).then(|| cost_failure / mean),
        age_label: age_label.to_string(),
    })
}
