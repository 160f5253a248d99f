//! Fitting life models to censored samples.
//!
//! The censored log-likelihood is written once ([`mle::loglik`]) for every
//! family and every kind of observation; the estimators choose parameters
//! for it. This module reads the fit options and dispatches. Knows nothing
//! of SQL.

pub mod bounds;
pub mod compare;
pub mod km;
pub mod mle;
pub mod rank;
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
    /// Rank regression of the plot's y (probability axis) on x (age axis).
    RankY,
    /// Rank regression of x (age axis) on y (probability axis).
    RankX,
}

impl Method {
    /// Name used in options and in the model.
    pub fn name(&self) -> &'static str {
        match self {
            Method::Mle => "mle",
            Method::RankY => "rank_y",
            Method::RankX => "rank_x",
        }
    }
}

/// Accepted method names, in the order documented.
pub const METHODS: &[&str] = &["mle", "rank_y", "rank_x"];
/// Accepted plotting-position names for rank regression.
pub const RANKS: &[&str] = &["bernard", "exact"];

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
    /// Median-rank plotting positions for rank regression.
    pub ranks: rank::Positions,
}

impl Default for FitOptions {
    fn default() -> Self {
        let family = dist::family("weibull").expect("weibull is listed");
        FitOptions {
            family,
            method: Method::Mle,
            fixed: vec![None; family.k()],
            keep_sample: false,
            ranks: rank::Positions::Bernard,
        }
    }
}

/// Keys accepted in the options object besides the family's parameter names.
pub const OPTION_KEYS: &[&str] = &["dist", "method", "ranks", "keep_sample"];

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
                        Some("rank_y") => Method::RankY,
                        Some("rank_x") => Method::RankX,
                        _ => {
                            return Err(LifeError::BadOptions(format!(
                                "name an unknown method {v}; accepted: {}",
                                quoted_list(METHODS)
                            )))
                        }
                    }
                }
                "ranks" => {
                    opts.ranks = match v.as_str() {
                        Some("bernard") => rank::Positions::Bernard,
                        Some("exact") => rank::Positions::Exact,
                        _ => {
                            return Err(LifeError::BadOptions(format!(
                                "name unknown ranks {v}; accepted: {}",
                                quoted_list(RANKS)
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
        if opts.method != Method::Mle && opts.fixed.iter().any(Option::is_some) {
            return Err(LifeError::BadOptions(
                "cannot fix parameters with rank regression; use method 'mle'".into(),
            ));
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

/// The age at which every failure can have happened, when the data allow
/// all of them to be at one age: every exact failure there, every
/// suspension at or below it, every censored failure's interval containing
/// it. Then a distribution squeezed onto that age makes the likelihood
/// grow without bound, and no family with a free spread has a maximum.
fn single_failure_age(obs: &[Obs]) -> Option<f64> {
    let mut exact = obs.iter().filter(|o| o.kind() == Kind::Failure);
    let age = exact.next()?.earliest;
    let fits = |o: &Obs| match o.kind() {
        Kind::Failure => o.earliest == age,
        Kind::Suspension => o.earliest <= age,
        Kind::LeftCensored | Kind::Interval => o.earliest <= age && age <= o.latest,
    };
    obs.iter().all(fits).then_some(age)
}

/// Fits the model the options ask for; `skipped` counts rows ignored for a NULL age.
pub fn fit(sample: &Sample, opts: &FitOptions, skipped: u64) -> LifeResult<Model> {
    let fam = opts.family;
    // The merged observations, built only when a branch needs them (the
    // plain Weibull fit works on per-age groups straight from the sample).
    let obs_cell = std::cell::OnceCell::new();
    let obs = || obs_cell.get_or_init(|| sample.obs()).as_slice();
    let r = sample.failed_lives();
    let known_weibull_shape = (fam.name == "weibull")
        .then(|| opts.fixed[0])
        .flatten()
        .filter(|_| opts.fixed[1].is_none());
    let mut known = None;
    let mut correlation = None;
    let (params, cov, ll) = if opts.method != Method::Mle {
        let regress = if opts.method == Method::RankY {
            rank::Regress::OnY
        } else {
            rank::Regress::OnX
        };
        let rf = rank::rank_regression(fam, obs(), opts.ranks, regress)?;
        correlation = Some(rf.correlation);
        let d = (fam.build)(&rf.params)?;
        let ll = mle::loglik(d.as_ref(), obs());
        (rf.params, Vec::new(), ll)
    } else if r == 0 {
        // No failures: only a known Weibull shape gives an answer, the
        // scale whose 63.2% lower confidence bound the data support.
        let (Some(shape), Some(t)) = (
            known_weibull_shape,
            known_weibull_shape.and_then(|b| exposure(obs(), b)),
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
            mle::loglik(d.as_ref(), obs()),
        )
    } else if fam.name == "weibull"
        && sample.is_right_censored_only()
        && opts.fixed.iter().all(Option::is_none)
    {
        let est = weibull_mle::fit(&sample.groups())?;
        (
            vec![est.shape, est.scale],
            est.cov.iter().map(|r| r.to_vec()).collect(),
            est.loglik,
        )
    } else if fam.name == "exponential"
        && opts.fixed.iter().all(Option::is_none)
        && sample.left_censored() == 0
        && sample.interval_censored() == 0
    {
        // Exact failures and suspensions, late entry allowed: the maximum in
        // closed form, the total time on test over the failures,
        // theta = sum count (t - entry) / r, with variance theta^2 / r.
        let time_on_test: f64 = obs().iter().map(|o| o.count * (o.earliest - o.entry)).sum();
        let rf = r as f64;
        let scale = time_on_test / rf;
        let d = (fam.build)(&[scale])?;
        (
            vec![scale],
            vec![vec![scale * scale / rf]],
            mle::loglik(d.as_ref(), obs()),
        )
    } else if let Some(age) = (fam.k() >= 2 && opts.fixed.iter().all(Option::is_none))
        .then(|| single_failure_age(obs()))
        .flatten()
    {
        // Checked before any search: on such data the likelihood grows
        // without bound as the spread shrinks, and a search would chase it
        // for seconds (measured: 2 to 18 s for the gamma) before failing.
        return Err(LifeError::NotEstimable(format!(
            "the {} fit has no maximum: every failure is at age {} and no \
             other life contradicts a failure exactly there, so the spread \
             shrinks to zero; failures at different ages (or a parameter \
             fixed in the options) are needed",
            fam.name,
            show_number(age)
        )));
    } else if fam.param_index("location") == Some(2) && opts.fixed.iter().all(Option::is_none) {
        let est = mle::fit_with_location(fam, obs())?;
        (est.params, est.cov, est.loglik)
    } else if let (Some(shape), Some(t)) = (
        known_weibull_shape,
        known_weibull_shape.and_then(|b| exposure(obs(), b)),
    ) {
        // Known Weibull shape, exact and right-censored lives: the scale in
        // closed form, eta = (sum (t^beta - entry^beta) / r)^(1/beta), with
        // variance eta^2 / (beta^2 r) from the information.
        let rf = r as f64;
        let scale = (t / rf).powf(1.0 / shape);
        known = Some(KnownShape {
            exposure: t,
            failures: r,
        });
        let d = (fam.build)(&[shape, scale])?;
        (
            vec![shape, scale],
            vec![
                vec![0.0, 0.0],
                vec![0.0, scale * scale / (shape * shape * rf)],
            ],
            mle::loglik(d.as_ref(), obs()),
        )
    } else {
        let est = mle::fit(fam, obs(), None, &opts.fixed)?;
        if let Some(shape) = known_weibull_shape {
            known = exposure(obs(), shape).map(|t| KnownShape {
                exposure: t,
                failures: r,
            });
        }
        (est.params, est.cov, est.loglik)
    };
    // One check for every estimator: a model whose numbers are not finite
    // would be written with nulls that its own readers refuse.
    if params
        .iter()
        .chain(cov.iter().flatten())
        .any(|v| !v.is_finite())
    {
        return Err(LifeError::NotEstimable(format!(
            "the {} fit gave numbers out of range (parameters {params:?}); \
             the data or the fixed values are too extreme",
            fam.name
        )));
    }
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
            correlation,
            ranks: (opts.method != Method::Mle).then(|| {
                match opts.ranks {
                    rank::Positions::Bernard => "bernard",
                    rank::Positions::Exact => "exact",
                }
                .to_string()
            }),
            sample: opts.keep_sample.then(|| obs().to_vec()),
        }),
    })
}
