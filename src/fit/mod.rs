//! Fitting life models to censored samples.
//!
//! The censored log-likelihood is written once here for every family; the
//! estimators choose parameters for it. Knows nothing of SQL.

pub mod weibull_mle;

use crate::dist::{self, weibull::Weibull, LifeDistribution};
use crate::error::{LifeError, LifeResult};
use crate::model::{FitSummary, Model};
use crate::sample::{AgeGroup, Sample};
use serde_json::Value;

/// What the caller asked for in the fit's `options` argument.
#[derive(Debug, Clone, PartialEq)]
pub struct FitOptions {
    /// Family name, one of [`FITTABLE`].
    pub dist: &'static str,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions { dist: "weibull" }
    }
}

/// Families that have an estimator, in the order documented.
pub const FITTABLE: &[&str] = &["weibull"];
/// Keys accepted in the options object.
pub const OPTION_KEYS: &[&str] = &["dist"];

fn quoted_list(items: &[&str]) -> String {
    items
        .iter()
        .map(|s| format!("'{s}'"))
        .collect::<Vec<_>>()
        .join(", ")
}

impl FitOptions {
    /// Parses the options JSON text, e.g. `{"dist":"weibull"}`.
    pub fn parse(text: &str) -> LifeResult<Self> {
        if text.len() > 4096 {
            return Err(LifeError::BadOptions(format!(
                "are {} bytes long; expected a small JSON object such as {{\"dist\":\"weibull\"}}",
                text.len()
            )));
        }
        let value: Value = serde_json::from_str(text).map_err(|e| {
            LifeError::BadOptions(format!(
                "are not valid JSON ({e}); expected an object such as {{\"dist\":\"weibull\"}}"
            ))
        })?;
        let Value::Object(map) = value else {
            return Err(LifeError::BadOptions(format!(
                "must be a JSON object such as {{\"dist\":\"weibull\"}}, got {text}"
            )));
        };
        let mut opts = FitOptions::default();
        for (key, v) in &map {
            match key.as_str() {
                "dist" => {
                    let name = v.as_str().unwrap_or_default();
                    opts.dist = FITTABLE
                        .iter()
                        .copied()
                        .find(|f| *f == name)
                        .ok_or_else(|| {
                            LifeError::BadOptions(format!(
                                "name an unknown dist {v}; accepted: {}",
                                quoted_list(FITTABLE)
                            ))
                        })?;
                }
                _ => {
                    return Err(LifeError::BadOptions(format!(
                        "have an unknown key '{key}'; accepted keys: {}",
                        quoted_list(OPTION_KEYS)
                    )))
                }
            }
        }
        Ok(opts)
    }
}

/// Censored log-likelihood of merged data under any family:
/// sum over failures of ln f(t) + sum over suspensions of ln R(t).
pub fn loglik(d: &dyn LifeDistribution, groups: &[AgeGroup]) -> f64 {
    groups
        .iter()
        .map(|g| {
            let mut l = 0.0;
            if g.failures > 0.0 {
                l += g.failures * d.ln_pdf(g.age);
            }
            if g.suspensions > 0.0 {
                l -= g.suspensions * d.cum_hazard(g.age);
            }
            l
        })
        .sum()
}

/// Fits the model the options ask for; `skipped` counts rows ignored for a NULL age.
pub fn fit(sample: &Sample, opts: &FitOptions, skipped: u64) -> LifeResult<Model> {
    let groups = sample.groups();
    let (dist, cov): (Box<dyn LifeDistribution>, Vec<Vec<f64>>) = match opts.dist {
        "weibull" => {
            let est = weibull_mle::fit(&groups)?;
            let d = Weibull::new(est.shape, est.scale).map_err(|_| {
                LifeError::NoConvergence(format!(
                    "the Weibull fit gave shape {} and scale {}, out of range",
                    est.shape, est.scale
                ))
            })?;
            (Box::new(d), est.cov.iter().map(|r| r.to_vec()).collect())
        }
        other => {
            return Err(LifeError::BadOptions(format!(
                "name dist '{other}', which has no estimator; accepted: {}",
                quoted_list(FITTABLE)
            )))
        }
    };
    debug_assert!(dist::family(opts.dist).is_some());
    let ll = loglik(dist.as_ref(), &groups);
    Ok(Model {
        dist,
        fit: Some(FitSummary {
            method: "mle".to_string(),
            n: sample.len(),
            failures: sample.failures(),
            suspensions: sample.suspensions(),
            skipped,
            loglik: ll,
            cov,
        }),
    })
}
