//! The fitted model value and its JSON form.
//!
//! A model travels through SQL as JSON text: readable by people and by
//! SQLite's own `json_extract`, versioned, and parsed defensively because a
//! model may be typed by hand or arrive from anywhere. Fits nothing.

use crate::dist::{self, LifeDistribution};
use crate::error::{LifeError, LifeResult};
use crate::sample::{Obs, Sample};
use serde_json::{json, Map, Value};

/// Version of the JSON layout written by this extension.
pub const MODEL_VERSION: u64 = 1;
/// Longest model text accepted, in bytes.
pub const MAX_MODEL_BYTES: usize = 1 << 20;

thread_local! {
    static PARSES: std::cell::Cell<u64> = const { std::cell::Cell::new(0) };
}

/// How many models this thread has parsed: lets tests and benchmarks check
/// that a reader over many rows parses a constant model once per statement.
pub fn parses_on_this_thread() -> u64 {
    PARSES.with(|c| c.get())
}

/// What the known-shape (few or zero failures) method needs for its
/// chi-square bound on the Weibull scale.
#[derive(Debug, Clone, PartialEq)]
pub struct KnownShape {
    /// Sum over units of t^shape - entry^shape.
    pub exposure: f64,
    /// Number of failures r.
    pub failures: u64,
}

/// How a model was fitted and to what.
#[derive(Debug, Clone, PartialEq)]
pub struct FitSummary {
    /// Estimation method, e.g. `mle`.
    pub method: String,
    /// Number of unit lives used.
    pub n: u64,
    /// Number of exactly observed failures.
    pub failures: u64,
    /// Number of suspensions.
    pub suspensions: u64,
    /// Number of left-censored lives (found failed at the first inspection).
    pub left_censored: u64,
    /// Number of interval-censored lives.
    pub interval_censored: u64,
    /// Number of lives observed from an entry age above 0 (left truncation).
    pub truncated: u64,
    /// Rows skipped because their age was NULL.
    pub skipped: u64,
    /// Maximised log-likelihood (densities in the data's age unit).
    pub loglik: f64,
    /// Covariance matrix of the parameter estimates, in the family's
    /// parameter order (empty where the estimator gives none).
    pub cov: Vec<Vec<f64>>,
    /// Names of parameters held at known values.
    pub fixed: Vec<String>,
    /// Inputs of the known-shape chi-square bound, where it applies.
    pub known: Option<KnownShape>,
    /// Correlation coefficient of the probability plot (rank regression).
    pub correlation: Option<f64>,
    /// Plotting positions used by rank regression (`bernard` or `exact`).
    pub ranks: Option<String>,
    /// The merged observations, when the fit was asked to keep them.
    pub sample: Option<Vec<Obs>>,
}

/// A life model: a distribution, and how it was fitted if it was.
#[derive(Debug)]
pub struct Model {
    /// The fitted (or hand-written) distribution.
    pub dist: Box<dyn LifeDistribution>,
    /// Fit details; absent for a model written by hand.
    pub fit: Option<FitSummary>,
}

impl Model {
    /// The model as JSON text.
    pub fn to_json(&self) -> String {
        let fam = self.dist.family();
        let mut m = Map::new();
        m.insert("model_version".into(), json!(MODEL_VERSION));
        m.insert("dist".into(), json!(fam.name));
        for (info, v) in fam.params.iter().zip(self.dist.params()) {
            m.insert(info.name.into(), json!(v));
        }
        if let Some(f) = &self.fit {
            m.insert("method".into(), json!(f.method));
            m.insert("n".into(), json!(f.n));
            m.insert("failures".into(), json!(f.failures));
            m.insert("suspensions".into(), json!(f.suspensions));
            if f.left_censored > 0 {
                m.insert("left_censored".into(), json!(f.left_censored));
            }
            if f.interval_censored > 0 {
                m.insert("interval_censored".into(), json!(f.interval_censored));
            }
            if f.truncated > 0 {
                m.insert("truncated".into(), json!(f.truncated));
            }
            m.insert("skipped".into(), json!(f.skipped));
            m.insert("loglik".into(), json!(f.loglik));
            if !f.cov.is_empty() {
                let names: Vec<&str> = fam.params.iter().map(|p| p.name).collect();
                m.insert("cov".into(), json!({"params": names, "matrix": f.cov}));
            }
            if !f.fixed.is_empty() {
                m.insert("fixed".into(), json!(f.fixed));
            }
            if let Some(k) = &f.known {
                m.insert(
                    "known_shape".into(),
                    json!({"exposure": k.exposure, "failures": k.failures}),
                );
            }
            if let Some(r) = f.correlation {
                m.insert("correlation".into(), json!(r));
            }
            if let Some(r) = &f.ranks {
                m.insert("ranks".into(), json!(r));
            }
            if let Some(obs) = &f.sample {
                let rows: Vec<Value> = obs
                    .iter()
                    .map(|o| {
                        let latest = if o.latest.is_finite() {
                            json!(o.latest)
                        } else {
                            Value::Null
                        };
                        json!([o.earliest, latest, o.entry, o.count])
                    })
                    .collect();
                m.insert("sample".into(), Value::Array(rows));
            }
        }
        Value::Object(m).to_string()
    }

    /// Parses model JSON text, checking every value it relies on.
    pub fn parse(text: &str) -> LifeResult<Model> {
        PARSES.with(|c| c.set(c.get() + 1));
        if text.len() > MAX_MODEL_BYTES {
            return Err(LifeError::BadModel(format!(
                "is {} bytes long, more than the {} a model can be",
                text.len(),
                MAX_MODEL_BYTES
            )));
        }
        let value: Value = serde_json::from_str(text)
            .map_err(|e| LifeError::BadModel(format!("is not valid JSON ({e}): {}", clip(text))))?;
        let Value::Object(map) = value else {
            return Err(LifeError::BadModel(format!(
                "must be a JSON object as life_fit returns, got {}",
                clip(text)
            )));
        };
        if let Some(v) = map.get("model_version") {
            match v.as_u64() {
                Some(1) => {}
                Some(k) if k > MODEL_VERSION => {
                    return Err(LifeError::BadModel(format!(
                        "has model_version {k}, newer than this extension reads ({MODEL_VERSION})"
                    )))
                }
                _ => {
                    return Err(LifeError::BadModel(format!(
                        "has model_version {v}; expected {MODEL_VERSION}"
                    )))
                }
            }
        }
        let name = match map.get("dist") {
            Some(Value::String(s)) => s.as_str(),
            Some(v) => {
                return Err(LifeError::BadModel(format!(
                    "has dist {}; expected one of {}",
                    clip(&v.to_string()),
                    dist::family_names()
                )))
            }
            None => {
                return Err(LifeError::BadModel(format!(
                    "has no \"dist\" key; expected one of {}",
                    dist::family_names()
                )))
            }
        };
        let fam = dist::family(name).ok_or_else(|| {
            LifeError::BadModel(format!(
                "has unknown dist '{}'; expected one of {}",
                clip(name),
                dist::family_names()
            ))
        })?;
        let mut params = Vec::with_capacity(fam.params.len());
        for info in fam.params {
            let v = map.get(info.name).ok_or_else(|| {
                LifeError::BadModel(format!("has no \"{}\" for dist '{}'", info.name, fam.name))
            })?;
            let x = v.as_f64().ok_or_else(|| {
                LifeError::BadModel(format!(
                    "{} must be a number, got {}",
                    info.name,
                    clip(&v.to_string())
                ))
            })?;
            params.push(x);
        }
        let dist = (fam.build)(&params)?;
        let fit = parse_fit(&map, fam.params.len())?;
        Ok(Model { dist, fit })
    }
}

/// Reads the optional fit details; present keys must be well formed.
fn parse_fit(map: &Map<String, Value>, k: usize) -> LifeResult<Option<FitSummary>> {
    if !map.contains_key("n") {
        return Ok(None);
    }
    let count = |key: &str| -> LifeResult<u64> {
        map.get(key).and_then(Value::as_u64).ok_or_else(|| {
            LifeError::BadModel(format!(
                "{key} must be a whole number >= 0, got {}",
                map.get(key)
                    .map(|v| clip(&v.to_string()))
                    .unwrap_or_else(|| "nothing".into())
            ))
        })
    };
    let optional = |key: &str| -> LifeResult<u64> {
        if map.contains_key(key) {
            count(key)
        } else {
            Ok(0)
        }
    };
    let n = count("n")?;
    let failures = count("failures")?;
    let suspensions = count("suspensions")?;
    let left_censored = optional("left_censored")?;
    let interval_censored = optional("interval_censored")?;
    let truncated = optional("truncated")?;
    let skipped = optional("skipped")?;
    let total = [failures, suspensions, left_censored, interval_censored]
        .iter()
        .try_fold(0u64, |a, &b| a.checked_add(b));
    if total != Some(n) {
        return Err(LifeError::BadModel(format!(
            "counts disagree: failures {failures} + suspensions {suspensions} + \
             left_censored {left_censored} + interval_censored {interval_censored} != n {n}"
        )));
    }
    let loglik = map
        .get("loglik")
        .and_then(Value::as_f64)
        .unwrap_or(f64::NAN);
    let method = map
        .get("method")
        .and_then(Value::as_str)
        .unwrap_or("mle")
        .chars()
        .take(32)
        .collect();
    let mut cov = Vec::new();
    if let Some(c) = map.get("cov") {
        let rows = c
            .get("matrix")
            .and_then(Value::as_array)
            .filter(|r| r.len() == k)
            .ok_or_else(|| LifeError::BadModel(format!("cov.matrix must be {k} x {k}")))?;
        for row in rows {
            let row = row
                .as_array()
                .filter(|r| r.len() == k)
                .ok_or_else(|| LifeError::BadModel(format!("cov.matrix must be {k} x {k}")))?;
            let mut out = Vec::with_capacity(k);
            for x in row {
                let x = x.as_f64().filter(|x| x.is_finite()).ok_or_else(|| {
                    LifeError::BadModel(format!(
                        "cov.matrix entries must be finite numbers, got {}",
                        clip(&x.to_string())
                    ))
                })?;
                out.push(x);
            }
            cov.push(out);
        }
    }
    let fixed = match map.get("fixed") {
        None => Vec::new(),
        Some(Value::Array(a)) if a.len() <= k => a
            .iter()
            .map(|v| v.as_str().map(str::to_string))
            .collect::<Option<Vec<_>>>()
            .ok_or_else(|| LifeError::BadModel("fixed must list parameter names".into()))?,
        Some(_) => {
            return Err(LifeError::BadModel(
                "fixed must list parameter names".into(),
            ))
        }
    };
    let known = match map.get("known_shape") {
        None => None,
        Some(v) => {
            let exposure = v.get("exposure").and_then(Value::as_f64);
            let r = v.get("failures").and_then(Value::as_u64);
            match (exposure, r) {
                (Some(e), Some(r)) if e.is_finite() && e > 0.0 => Some(KnownShape {
                    exposure: e,
                    failures: r,
                }),
                _ => {
                    return Err(LifeError::BadModel(
                        "known_shape must hold a positive exposure and a failure count".into(),
                    ))
                }
            }
        }
    };
    let sample = match map.get("sample") {
        None => None,
        Some(v) => Some(parse_sample(v)?),
    };
    Ok(Some(FitSummary {
        method,
        n,
        failures,
        suspensions,
        left_censored,
        interval_censored,
        truncated,
        skipped,
        loglik,
        cov,
        fixed,
        known,
        correlation: map.get("correlation").and_then(Value::as_f64),
        ranks: map
            .get("ranks")
            .and_then(Value::as_str)
            .map(|r| r.chars().take(16).collect()),
        sample,
    }))
}

/// Reads a kept sample: rows of [earliest, latest or null, entry, count],
/// each validated as if it had arrived through the fit.
fn parse_sample(v: &Value) -> LifeResult<Vec<Obs>> {
    let rows = v
        .as_array()
        .ok_or_else(|| LifeError::BadModel("sample must be an array of rows".into()))?;
    let mut out = Vec::with_capacity(rows.len());
    for row in rows {
        let bad = || {
            LifeError::BadModel(format!(
                "sample rows must be [earliest, latest or null, entry, count], got {}",
                clip(&row.to_string())
            ))
        };
        let r = row.as_array().filter(|r| r.len() == 4).ok_or_else(bad)?;
        let earliest = r[0].as_f64().ok_or_else(bad)?;
        let latest = if r[1].is_null() {
            None
        } else {
            Some(r[1].as_f64().ok_or_else(bad)?)
        };
        let entry = r[2].as_f64().ok_or_else(bad)?;
        let count = r[3]
            .as_f64()
            .filter(|c| c.fract() == 0.0 && *c >= 1.0)
            .ok_or_else(bad)?;
        let o = Sample::observation(earliest, latest, entry, count as u64).map_err(|e| {
            LifeError::BadModel(format!("sample row {}: {e}", clip(&row.to_string())))
        })?;
        out.push(o);
    }
    Ok(out)
}

/// Shortens hostile or huge text for an error message.
fn clip(text: &str) -> String {
    const MAX: usize = 60;
    if text.chars().count() <= MAX {
        text.to_string()
    } else {
        let head: String = text.chars().take(MAX).collect();
        format!("{head}...")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_is_exact() {
        let text = r#"{"dist":"weibull","shape":2.102,"scale":81.88}"#;
        let m = Model::parse(text).unwrap();
        let again = Model::parse(&m.to_json()).unwrap();
        assert_eq!(again.dist.params(), vec![2.102, 81.88]);
    }

    #[test]
    fn hostile_models_are_refused_with_reasons() {
        let deep = "[".repeat(10_000);
        for (text, needle) in [
            ("", "not valid JSON"),
            ("[1,2]", "must be a JSON object"),
            (
                r#"{"dist":"weibull","shape":-1,"scale":3}"#,
                "shape must be",
            ),
            (
                r#"{"dist":"weibull","shape":1,"scale":1e999}"#,
                "not valid JSON",
            ),
            (r#"{"dist":"gumbel","shape":1,"scale":1}"#, "unknown dist"),
            (r#"{"shape":1,"scale":1}"#, "no \"dist\""),
            (
                r#"{"dist":"weibull","shape":"2","scale":1}"#,
                "shape must be a number",
            ),
            (r#"{"dist":"weibull","shape":2}"#, "no \"scale\""),
            (
                r#"{"model_version":9,"dist":"weibull","shape":2,"scale":1}"#,
                "newer",
            ),
            (deep.as_str(), "not valid JSON"),
        ] {
            let e = Model::parse(text).unwrap_err().to_string();
            assert!(e.contains(needle), "{text:.40}: {e}");
        }
    }
}
