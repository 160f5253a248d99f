//! Fitting life models to censored samples.
//!
//! The censored log-likelihood is written once ([`mle::loglik`]) for every
//! family and every kind of observation; the estimators choose parameters
//! for it. This module reads the fit options and dispatches. Knows nothing
//! of SQL.

pub mod mle;
pub mod weibull_mle;

use crate::dist::{self, Family};
use crate::error::{show_number, LifeError, LifeResult};
use crate::model::{FitSummary, KnownShape, Model};
use crate::sample::{Kind, Obs, Sample};
use serde_json::Value;

/// Estimation method.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Maximum likelihood (default).
    Mle,
}

impl Method {
    /// Name used in options and in the model.
    pub fn name(&self) -> &'static str {
        match self {
            Method::Mle => "mle",
        }
    }
}

/// Accepted method names, in the order documented.
pub const METHODS: &[&str] = &["mle"];

/// What the caller asked for in the fit's `options` argument.
#[derive(Debug, Clone)]
pub struct FitOptions {
    /// The family to fit.
    pub family: &'static Family,
    /// The estimator.
    pub method: Method,
    /// Parameters held at known values (e.g. a known Weibull shape), by index.
    pub fixed: Vec<Option<f64>>,
    /// Keep the merged sample in the model (for likelihood-ratio bounds).
    pub keep_sample: bool,
}

impl Default for FitOptions {
    fn default() -> Self {
        let family = dist::family("weibull").expect("weibull is listed");
        FitOptions {
            family,
            method: Method::Mle,
            fixed: vec![None; family.k()],
            keep_sample: false,
        }
    }
}

/// Keys accepted in the options object besides the family's parameter names.
pub const OPTION_KEYS: &[&str] = &["dist", "method", "keep_sample"];

fn quoted_list(items: &[&str]) -> String {
    items
        .iter()
        .map(|s| format!("'{s}'"))
        .collect::<Vec<_>>()
        .join(", ")
}

impl FitOptions {
    /// Parses the options JSON text, e.g. `{"dist":"weibull","shape":2}`.
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
        if let Some(v) = map.get("dist") {
            let name = v.as_str().unwrap_or_default();
            opts.family = dist::family(name).ok_or_else(|| {
                LifeError::BadOptions(format!(
                    "name an unknown dist {v}; accepted: {}",
                    dist::family_names()
                ))
            })?;
            opts.fixed = vec![None; opts.family.k()];
        }
        for (key, v) in &map {
            match key.as_str() {
                "dist" => {}
                "method" => {
                    opts.method = match v.as_str() {
                        Some("mle") => Method::Mle,
                        _ => {
                            return Err(LifeError::BadOptions(format!(
                                "name an unknown method {v}; accepted: {}",
                                quoted_list(METHODS)
                            )))
                        }
                    }
                }
                "keep_sample" => {
                    opts.keep_sample = v.as_bool().ok_or_else(|| {
                        LifeError::BadOptions(format!("keep_sample must be true or false, got {v}"))
                    })?
                }
                other => match opts.family.param_index(other) {
                    Some(i) => {
                        let x = v.as_f64().ok_or_else(|| {
                            LifeError::BadOptions(format!(
                                "fix {other} at {v}, which is not a number"
                            ))
                        })?;
                        let ok = match opts.family.params[i].kind {
                            dist::ParamKind::Positive => x.is_finite() && x > 0.0,
                            dist::ParamKind::Real => x.is_finite(),
                        };
                        if !ok {
                            return Err(LifeError::BadOptions(format!(
                                "fix {other} at {}, out of range (it must be a finite number{})",
                                show_number(x),
                                if opts.family.params[i].kind == dist::ParamKind::Positive {
                                    " > 0"
                                } else {
                                    ""
                                }
                            )));
                        }
                        opts.fixed[i] = Some(x);
                    }
                    None => {
                        let mut keys: Vec<&str> = OPTION_KEYS.to_vec();
                        keys.extend(opts.family.params.iter().map(|p| p.name));
                        return Err(LifeError::BadOptions(format!(
                            "have an unknown key '{key}'; accepted keys: {}",
                            quoted_list(&keys)
                        )));
                    }
                },
            }
        }
        if opts.fixed.iter().all(Option::is_some) {
            return Err(LifeError::BadOptions(format!(
                "fix every parameter of the {} family; nothing is left to fit",
                opts.family.name
            )));
        }
        Ok(opts)
    }
}

/// Censored log-likelihood of right-censored merged data (failures and
/// suspensions per age); see [`mle::loglik`] for every kind of censoring.
pub fn loglik(d: &dyn dist::LifeDistribution, groups: &[crate::sample::AgeGroup]) -> f64 {
    let obs: Vec<Obs> = groups
        .iter()
        .flat_map(|g| {
            [
                (g.failures > 0.0).then_some(Obs {
                    earliest: g.age,
                    latest: g.age,
                    entry: 0.0,
                    count: g.failures,
                }),
                (g.suspensions > 0.0).then_some(Obs {
                    earliest: g.age,
                    latest: f64::INFINITY,
                    entry: 0.0,
                    count: g.suspensions,
                }),
            ]
        })
        .flatten()
        .collect();
    mle::loglik(d, &obs)
}

/// Sum over exact failures and suspensions of count * (t^beta - entry^beta):
/// the total "Weibull-transformed exposure" behind the known-shape method.
/// None when the data hold left- or interval-censored lives.
fn exposure(obs: &[Obs], shape: f64) -> Option<f64> {
    let mut total = 0.0;
    for o in obs {
        match o.kind() {
            Kind::Failure | Kind::Suspension => {
                total += o.count * (o.earliest.powf(shape) - o.entry.powf(shape));
            }
            Kind::LeftCensored | Kind::Interval => return None,
        }
    }
    Some(total)
}

/// Fits the model the options ask for; `skipped` counts rows ignored for a NULL age.
pub fn fit(sample: &Sample, opts: &FitOptions, skipped: u64) -> LifeResult<Model> {
    let fam = opts.family;
    let obs = sample.obs();
    let r = sample.failed_lives();
    let known_weibull_shape = (fam.name == "weibull")
        .then(|| opts.fixed[0])
        .flatten()
        .filter(|_| opts.fixed[1].is_none());
    let mut known = None;
    let (params, cov, ll) = if r == 0 {
        // No failures: only a known Weibull shape gives an answer, the
        // scale whose 63.2% lower confidence bound the data support.
        let (Some(shape), Some(t)) = (
            known_weibull_shape,
            known_weibull_shape.and_then(|b| exposure(&obs, b)),
        ) else {
            return Err(LifeError::NotEstimable(format!(
                "no failures among {} lives: a {} fit needs at least one failure \
                 (with none, fit a Weibull with a known shape, e.g. {{\"shape\":2}})",
                sample.len(),
                fam.name
            )));
        };
        if t <= 0.0 {
            return Err(LifeError::NotEstimable(
                "no failures and no exposure (every age equals its entry age)".into(),
            ));
        }
        known = Some(KnownShape {
            exposure: t,
            failures: 0,
        });
        let scale = t.powf(1.0 / shape);
        let d = (fam.build)(&[shape, scale])?;
        (
            vec![shape, scale],
            vec![vec![0.0; 2]; 2],
            mle::loglik(d.as_ref(), &obs),
        )
    } else if fam.name == "weibull"
        && sample.is_right_censored_only()
        && opts.fixed.iter().all(Option::is_none)
    {
        let est = weibull_mle::fit(&sample.groups())?;
        let d = (fam.build)(&[est.shape, est.scale])?;
        (
            vec![est.shape, est.scale],
            est.cov.iter().map(|r| r.to_vec()).collect(),
            mle::loglik(d.as_ref(), &obs),
        )
    } else if fam.param_index("location") == Some(2) && opts.fixed.iter().all(Option::is_none) {
        let est = mle::fit_with_location(fam, &obs)?;
        (est.params, est.cov, est.loglik)
    } else {
        let est = mle::fit(fam, &obs, None, &opts.fixed)?;
        if let Some(shape) = known_weibull_shape {
            known = exposure(&obs, shape).map(|t| KnownShape {
                exposure: t,
                failures: r,
            });
        }
        (est.params, est.cov, est.loglik)
    };
    Ok(Model {
        dist: (fam.build)(&params)?,
        fit: Some(FitSummary {
            method: opts.method.name().to_string(),
            n: sample.len(),
            failures: sample.failures(),
            suspensions: sample.suspensions(),
            left_censored: sample.left_censored(),
            interval_censored: sample.interval_censored(),
            truncated: sample.truncated(),
            skipped,
            loglik: ll,
            cov,
            fixed: fam
                .params
                .iter()
                .zip(&opts.fixed)
                .filter(|(_, f)| f.is_some())
                .map(|(p, _)| p.name.to_string())
                .collect(),
            known,
            sample: opts.keep_sample.then_some(obs),
        }),
    })
}
