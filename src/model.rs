//! The fitted model value and its JSON form.
//!
//! A model travels through SQL as JSON text: readable by people and by
//! SQLite's own `json_extract`, versioned, and parsed defensively because a
//! model may be typed by hand or arrive from anywhere. Fits nothing.

use crate::dist::{self, LifeDistribution};
use crate::error::{show_number, LifeError, LifeResult};
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

/// How a model was fitted and to what.
#[derive(Debug, Clone, PartialEq)]
pub struct FitSummary {
    /// Estimation method, e.g. `mle`.
    pub method: String,
    /// Number of unit lives used.
    pub n: u64,
    /// Number of failures.
    pub failures: u64,
    /// Number of suspensions.
    pub suspensions: u64,
    /// Rows skipped because their age was NULL.
    pub skipped: u64,
    /// Maximised log-likelihood (densities in the data's age unit).
    pub loglik: f64,
    /// Covariance matrix of the parameter estimates, in the family's parameter order.
    pub cov: Vec<Vec<f64>>,
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
            m.insert("skipped".into(), json!(f.skipped));
            m.insert("loglik".into(), json!(f.loglik));
            let names: Vec<&str> = fam.params.iter().map(|p| p.name).collect();
            m.insert("cov".into(), json!({"params": names, "matrix": f.cov}));
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
    let n = count("n")?;
    let failures = count("failures")?;
    let suspensions = count("suspensions")?;
    let skipped = map.get("skipped").and_then(Value::as_u64).unwrap_or(0);
    if failures + suspensions != n {
        return Err(LifeError::BadModel(format!(
            "counts disagree: failures {failures} + suspensions {suspensions} != n {n}"
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
    Ok(Some(FitSummary {
        method,
        n,
        failures,
        suspensions,
        skipped,
        loglik,
        cov,
    }))
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

/// Renders a parameter for messages.
pub fn show(x: f64) -> String {
    show_number(x)
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
