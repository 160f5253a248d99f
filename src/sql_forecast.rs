//! The fleet forecast aggregate: expected failures and spares over the units
//! in service, `life_forecast(model, age, horizon [, options])`.
//!
//! Each row is a unit running now: its class's model, its current age and
//! the horizon in the same usage unit. Identical rows merge into counts,
//! so memory grows with distinct (model, age, horizon) triples. The count
//! distribution comes from `decide::forecast`.

use crate::decide::forecast::{self, CountDistribution, RenewalForecast};
use crate::error::{show_number, LifeError};
use crate::model::Model;
use rusqlite::functions::{Aggregate, Context, WindowAggregate};
use rusqlite::types::ValueRef;
use rusqlite::Result;
use serde_json::{json, Value};
use std::collections::{BTreeMap, HashMap};

const NAME: &str = "life_forecast";

/// Options: `{"renewal": false, "quantiles": [0.5, 0.9, 0.95, 0.99]}`.
#[derive(Clone, Debug)]
struct ForecastOptions {
    renewal: bool,
    quantiles: Vec<f64>,
}

impl Default for ForecastOptions {
    fn default() -> Self {
        ForecastOptions {
            renewal: false,
            quantiles: vec![0.5, 0.9, 0.95, 0.99],
        }
    }
}

fn parse_options(text: &str) -> std::result::Result<ForecastOptions, LifeError> {
    let v: Value = serde_json::from_str(text).map_err(|e| {
        LifeError::BadOptions(format!(
            "are not valid JSON ({e}); expected an object such as {{\"renewal\":true}}"
        ))
    })?;
    let map = v.as_object().ok_or_else(|| {
        LifeError::BadOptions("must be a JSON object such as {\"renewal\":true}".into())
    })?;
    let mut out = ForecastOptions::default();
    for (k, v) in map {
        match k.as_str() {
            "renewal" => {
                out.renewal = v.as_bool().ok_or_else(|| {
                    LifeError::BadOptions(format!("renewal must be true or false, got {v}"))
                })?
            }
            "quantiles" => {
                let arr = v
                    .as_array()
                    .filter(|a| !a.is_empty() && a.len() <= 20)
                    .ok_or_else(|| {
                        LifeError::BadOptions(format!(
                            "quantiles must be a list of 1 to 20 probabilities, got {v}"
                        ))
                    })?;
                out.quantiles = arr
                    .iter()
                    .map(|q| {
                        q.as_f64().filter(|q| *q > 0.0 && *q < 1.0).ok_or_else(|| {
                            LifeError::BadOptions(format!("quantiles must lie in (0, 1), got {q}"))
                        })
                    })
                    .collect::<std::result::Result<_, _>>()?;
            }
            other => {
                return Err(LifeError::BadOptions(format!(
                    "have an unknown key '{other}'; accepted keys: 'renewal', 'quantiles'"
                )))
            }
        }
    }
    Ok(out)
}

/// Running state: distinct models, and counts per (model, age, horizon).
#[derive(Default)]
pub struct ForecastState {
    models: Vec<(Vec<u8>, std::sync::Arc<Model>)>,
    rows: HashMap<(usize, u64, u64), u64>,
    skipped: u64,
    options: Option<(Vec<u8>, ForecastOptions)>,
}

/// The `life_forecast` aggregate.
pub struct LifeForecast;

fn err(e: impl std::fmt::Display) -> rusqlite::Error {
    rusqlite::Error::UserFunctionError(crate::sql::error_text(NAME, e).into())
}

fn num(v: ValueRef<'_>, arg: &'static str) -> std::result::Result<Option<f64>, LifeError> {
    match v {
        ValueRef::Null => Ok(None),
        ValueRef::Integer(i) => Ok(Some(i as f64)),
        ValueRef::Real(r) => Ok(Some(r)),
        ValueRef::Text(t) => Err(LifeError::bad(
            arg,
            "must be a number",
            format!(
                "text '{}'",
                String::from_utf8_lossy(t)
                    .chars()
                    .take(40)
                    .collect::<String>()
            ),
        )),
        ValueRef::Blob(b) => Err(LifeError::bad(
            arg,
            "must be a number",
            format!("a blob of {} bytes", b.len()),
        )),
    }
}

impl ForecastState {
    /// Reads a row: the key, or None when skipped for a NULL.
    fn key(
        &mut self,
        ctx: &Context<'_>,
    ) -> std::result::Result<Option<(usize, u64, u64)>, LifeError> {
        if ctx.len() > 3 {
            match ctx.get_raw(3) {
                ValueRef::Null => {}
                ValueRef::Text(t) => match &self.options {
                    Some((seen, _)) if seen.as_slice() == t => {}
                    Some(_) => {
                        return Err(LifeError::BadOptions(
                            "must be the same on every row".into(),
                        ))
                    }
                    None => {
                        self.options =
                            Some((t.to_vec(), parse_options(&String::from_utf8_lossy(t))?))
                    }
                },
                other => {
                    return Err(LifeError::BadOptions(format!(
                        "must be JSON text such as '{{\"renewal\":true}}', got {other:?}"
                    )))
                }
            }
        }
        let (Some(age), Some(horizon)) =
            (num(ctx.get_raw(1), "age")?, num(ctx.get_raw(2), "horizon")?)
        else {
            return Ok(None);
        };
        for (arg, v) in [("age", age), ("horizon", horizon)] {
            if !(v.is_finite() && v >= 0.0) {
                return Err(LifeError::bad(
                    arg,
                    "must be a finite number >= 0",
                    show_number(v),
                ));
            }
        }
        let text = match ctx.get_raw(0) {
            ValueRef::Null => return Ok(None),
            ValueRef::Text(t) | ValueRef::Blob(t) => t,
            other => {
                return Err(LifeError::BadModel(format!(
                    "must be JSON text as life_fit returns, got {other:?}"
                )))
            }
        };
        let idx = match self.models.iter().position(|(t, _)| t.as_slice() == text) {
            Some(i) => i,
            None => {
                if self.models.len() >= 10_000 {
                    return Err(LifeError::BadModel(
                        "more than 10000 distinct models in one forecast".into(),
                    ));
                }
                let parsed = Model::parse(&String::from_utf8_lossy(text))?;
                self.models
                    .push((text.to_vec(), std::sync::Arc::new(parsed)));
                self.models.len() - 1
            }
        };
        Ok(Some((
            idx,
            (age + 0.0).to_bits(),
            (horizon + 0.0).to_bits(),
        )))
    }

    fn result(&self) -> std::result::Result<Option<String>, LifeError> {
        if self.rows.is_empty() {
            return Ok(None);
        }
        let opts = self
            .options
            .as_ref()
            .map(|(_, o)| o.clone())
            .unwrap_or_default();
        let mut keys: Vec<(&(usize, u64, u64), &u64)> = self.rows.iter().collect();
        keys.sort();
        let units: u64 = keys.iter().map(|(_, c)| **c).sum();
        let dist: CountDistribution = if opts.renewal {
            // One renewal grid per (model, horizon), then a pmf per age.
            let mut by_model: BTreeMap<(usize, u64), Vec<(f64, u64)>> = BTreeMap::new();
            for ((m, a, h), c) in &keys {
                by_model
                    .entry((*m, *h))
                    .or_default()
                    .push((f64::from_bits(*a), **c));
            }
            let mut pmfs = Vec::new();
            for ((m, h), ages) in by_model {
                let d = self.models[m].1.dist.as_ref();
                let grid = RenewalForecast::new(d, f64::from_bits(h), forecast::MAX_RENEWAL_COUNT)?;
                for (age, count) in ages {
                    let pmf = grid.count_pmf(age)?;
                    for _ in 0..count {
                        pmfs.push(pmf.clone());
                    }
                }
            }
            forecast::combine(&pmfs)?
        } else {
            let mut probs = Vec::with_capacity(units as usize);
            for ((m, a, h), c) in &keys {
                let p = self.models[*m]
                    .1
                    .dist
                    .cond_fail(f64::from_bits(*a), f64::from_bits(*h));
                if !(0.0..=1.0).contains(&p) {
                    return Err(LifeError::NotEstimable(format!(
                        "the model cannot give a failure probability at age {} (a unit that old \
                         cannot have survived under it)",
                        show_number(f64::from_bits(*a))
                    )));
                }
                probs.extend(std::iter::repeat_n(p, **c as usize));
            }
            forecast::poisson_binomial(&probs)?
        };
        let quantiles: serde_json::Map<String, Value> = opts
            .quantiles
            .iter()
            .map(|q| (format!("{q}"), json!(dist.quantile(*q))))
            .collect();
        let shown = dist.pmf.len().min(10_000);
        Ok(Some(
            json!({
                "units": units,
                "skipped": self.skipped,
                "expected": dist.mean,
                "sd": dist.sd,
                "renewal": opts.renewal,
                "exact": dist.exact,
                "quantiles": quantiles,
                "pmf": &dist.pmf[..shown],
            })
            .to_string(),
        ))
    }
}

impl Aggregate<ForecastState, Option<String>> for LifeForecast {
    fn init(&self, _: &mut Context<'_>) -> Result<ForecastState> {
        Ok(ForecastState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, st: &mut ForecastState) -> Result<()> {
        match st.key(ctx).map_err(err)? {
            None => st.skipped += 1,
            Some(k) => *st.rows.entry(k).or_insert(0) += 1,
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, st: Option<ForecastState>) -> Result<Option<String>> {
        match st {
            None => Ok(None),
            Some(st) => st.result().map_err(err),
        }
    }
}

impl WindowAggregate<ForecastState, Option<String>> for LifeForecast {
    fn value(&self, st: Option<&mut ForecastState>) -> Result<Option<String>> {
        match st {
            None => Ok(None),
            Some(st) => st.result().map_err(err),
        }
    }

    fn inverse(&self, ctx: &mut Context<'_>, st: &mut ForecastState) -> Result<()> {
        match st.key(ctx).map_err(err)? {
            None => st.skipped = st.skipped.saturating_sub(1),
            Some(k) => {
                let c = st
                    .rows
                    .get_mut(&k)
                    .ok_or_else(|| err("a row left the window that never entered it"))?;
                *c -= 1;
                if *c == 0 {
                    st.rows.remove(&k);
                }
            }
        }
        Ok(())
    }
}
