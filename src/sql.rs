//! Registration of every SQL function with SQLite.
//!
//! Argument parsing, NULL handling, error messages that name the function,
//! and per-statement caching of parsed models. No formulas live here: each
//! function hands validated numbers to `fit`, `dist`, `decide` or `usage`.

use crate::decide;
use crate::error::{show_number, LifeError};
use crate::fit::{self, FitOptions};
use crate::model::Model;
use crate::sample::Sample;
use crate::usage;
use rusqlite::functions::{Aggregate, Context, FunctionFlags, WindowAggregate};
use rusqlite::types::ValueRef;
use rusqlite::{Connection, Error, Result};
use std::sync::Arc;

/// Deterministic and innocuous: usable in views, indexes, generated columns
/// and triggers even with `PRAGMA trusted_schema=OFF`.
fn flags() -> FunctionFlags {
    FunctionFlags::SQLITE_UTF8
        | FunctionFlags::SQLITE_DETERMINISTIC
        | FunctionFlags::SQLITE_INNOCUOUS
}

/// An SQL error whose message starts with the function name.
fn user_error(func: &str, e: impl std::fmt::Display) -> Error {
    Error::UserFunctionError(format!("{func}: {e}").into())
}

/// Renders an SQL value for an error message (text clipped, blobs sized).
fn describe(v: ValueRef<'_>) -> String {
    match v {
        ValueRef::Null => "NULL".into(),
        ValueRef::Integer(i) => i.to_string(),
        ValueRef::Real(r) => show_number(r),
        ValueRef::Text(t) => {
            let s = String::from_utf8_lossy(t);
            let head: String = s.chars().take(40).collect();
            if head.len() < s.len() {
                format!("text '{head}...'")
            } else {
                format!("text '{head}'")
            }
        }
        ValueRef::Blob(b) => format!("a blob of {} bytes", b.len()),
    }
}

/// A numeric argument: None for NULL, an error for text or blobs.
fn number(v: ValueRef<'_>, arg: &'static str) -> std::result::Result<Option<f64>, LifeError> {
    match v {
        ValueRef::Null => Ok(None),
        ValueRef::Integer(i) => Ok(Some(i as f64)),
        ValueRef::Real(r) => Ok(Some(r)),
        other => Err(LifeError::bad(arg, "must be a number", describe(other))),
    }
}

/// An age-like argument: a finite number >= 0.
fn age_like(arg: &'static str, x: f64) -> std::result::Result<f64, LifeError> {
    if x.is_finite() && x >= 0.0 {
        Ok(x)
    } else {
        Err(LifeError::bad(
            arg,
            "must be a finite number >= 0",
            show_number(x),
        ))
    }
}

/// The model argument at `idx`, parsed once per statement when it is a
/// constant (SQLite auxiliary data); None for NULL.
fn model_arg(ctx: &Context<'_>, idx: usize, func: &'static str) -> Result<Option<Arc<Model>>> {
    match ctx.get_raw(idx) {
        ValueRef::Null => Ok(None),
        ValueRef::Text(_) | ValueRef::Blob(_) => {
            let m = ctx.get_or_create_aux(idx as i32, |v| {
                let bytes = match v {
                    ValueRef::Text(t) | ValueRef::Blob(t) => t,
                    _ => &[][..],
                };
                let text = std::str::from_utf8(bytes)
                    .map_err(|_| format!("{func}: model is not UTF-8 text as life_fit returns"))?;
                Model::parse(text).map_err(|e| format!("{func}: {e}"))
            })?;
            Ok(Some(m))
        }
        other => Err(user_error(
            func,
            format!(
                "model must be JSON text as life_fit returns, got {}",
                describe(other)
            ),
        )),
    }
}

/// Registers a scalar `func(model, x1, ..., xk)` whose numeric arguments are
/// checked by `check` and answered by `answer`. NULL anywhere gives NULL.
fn model_scalar<const K: usize>(
    conn: &Connection,
    func: &'static str,
    args: [&'static str; K],
    check: fn(&'static str, f64) -> std::result::Result<f64, LifeError>,
    answer: fn(&Model, [f64; K]) -> std::result::Result<Option<f64>, LifeError>,
) -> Result<()> {
    conn.create_scalar_function(func, (K + 1) as i32, flags(), move |ctx| {
        let mut xs = [0.0; K];
        for (i, arg) in args.iter().enumerate() {
            match number(ctx.get_raw(i + 1), arg).map_err(|e| user_error(func, e))? {
                None => return Ok(None),
                Some(x) => xs[i] = check(arg, x).map_err(|e| user_error(func, e))?,
            }
        }
        let Some(model) = model_arg(ctx, 0, func)? else {
            return Ok(None);
        };
        answer(&model, xs).map_err(|e| user_error(func, e))
    })
}

fn probability(arg: &'static str, p: f64) -> std::result::Result<f64, LifeError> {
    if (0.0..1.0).contains(&p) {
        Ok(p)
    } else {
        Err(LifeError::bad(arg, "must be in [0, 1)", show_number(p)))
    }
}

fn any_finite(arg: &'static str, x: f64) -> std::result::Result<f64, LifeError> {
    if x.is_finite() {
        Ok(x)
    } else {
        Err(LifeError::bad(
            arg,
            "must be a finite number",
            show_number(x),
        ))
    }
}

/// Running state of `life_fit` for one group or window frame.
#[derive(Default)]
struct FitState {
    sample: Sample,
    skipped: u64,
    options: Option<(Vec<u8>, FitOptions)>,
}

/// The `life_fit` aggregate and window function.
struct LifeFit;

const FIT: &str = "life_fit";

impl FitState {
    /// Reads one row's (age, failed[, options]); None when the age is NULL.
    fn row(&mut self, ctx: &Context<'_>) -> std::result::Result<Option<(f64, bool)>, LifeError> {
        if ctx.len() > 2 {
            match ctx.get_raw(2) {
                ValueRef::Null => {}
                ValueRef::Text(t) => match &self.options {
                    Some((seen, _)) if seen.as_slice() == t => {}
                    Some(_) => {
                        return Err(LifeError::BadOptions(
                            "must be the same on every row of a group".into(),
                        ))
                    }
                    None => {
                        let text = std::str::from_utf8(t)
                            .map_err(|_| LifeError::BadOptions("are not UTF-8 text".into()))?;
                        self.options = Some((t.to_vec(), FitOptions::parse(text)?));
                    }
                },
                other => {
                    return Err(LifeError::BadOptions(format!(
                        "must be JSON text such as '{{\"dist\":\"weibull\"}}', got {}",
                        describe(other)
                    )))
                }
            }
        }
        let Some(age) = number(ctx.get_raw(0), "age")? else {
            return Ok(None);
        };
        let age = age_like("age", age)?;
        let failed = match ctx.get_raw(1) {
            ValueRef::Integer(0) => false,
            ValueRef::Integer(1) => true,
            ValueRef::Real(0.0) => false,
            ValueRef::Real(1.0) => true,
            other => {
                return Err(LifeError::bad(
                    "failed",
                    "must be 1 (failure) or 0 (suspension)",
                    describe(other),
                ))
            }
        };
        Ok(Some((age, failed)))
    }

    fn model(&self) -> Result<Option<String>> {
        if self.sample.is_empty() {
            return Ok(None);
        }
        let opts = self
            .options
            .as_ref()
            .map(|(_, o)| o.clone())
            .unwrap_or_default();
        fit::fit(&self.sample, &opts, self.skipped)
            .map(|m| Some(m.to_json()))
            .map_err(|e| user_error(FIT, e))
    }
}

impl Aggregate<FitState, Option<String>> for LifeFit {
    fn init(&self, _: &mut Context<'_>) -> Result<FitState> {
        Ok(FitState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, acc: &mut FitState) -> Result<()> {
        match acc.row(ctx).map_err(|e| user_error(FIT, e))? {
            None => acc.skipped += 1,
            Some((age, failed)) => acc
                .sample
                .add(age, failed)
                .map_err(|e| user_error(FIT, e))?,
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, acc: Option<FitState>) -> Result<Option<String>> {
        match acc {
            None => Ok(None),
            Some(acc) => acc.model(),
        }
    }
}

impl WindowAggregate<FitState, Option<String>> for LifeFit {
    fn value(&self, acc: Option<&mut FitState>) -> Result<Option<String>> {
        match acc {
            None => Ok(None),
            Some(acc) => acc.model(),
        }
    }

    fn inverse(&self, ctx: &mut Context<'_>, acc: &mut FitState) -> Result<()> {
        match acc.row(ctx).map_err(|e| user_error(FIT, e))? {
            None => acc.skipped = acc.skipped.saturating_sub(1),
            Some((age, failed)) => acc
                .sample
                .remove(age, failed)
                .map_err(|e| user_error(FIT, e))?,
        }
        Ok(())
    }
}

/// An instant argument of `life_usage`: None for NULL.
fn instant_arg(
    v: ValueRef<'_>,
    arg: &'static str,
) -> std::result::Result<Option<usage::Instant>, LifeError> {
    match v {
        ValueRef::Null => Ok(None),
        ValueRef::Integer(i) => usage::instant_from_number(arg, i as f64).map(Some),
        ValueRef::Real(r) => usage::instant_from_number(arg, r).map(Some),
        ValueRef::Text(t) => {
            let s = String::from_utf8_lossy(t);
            usage::instant_from_text(arg, &s).map(Some)
        }
        ValueRef::Blob(b) => Err(LifeError::bad(
            arg,
            "must be a date (text or number)",
            format!("a blob of {} bytes", b.len()),
        )),
    }
}

fn life_usage(ctx: &Context<'_>) -> std::result::Result<Option<f64>, LifeError> {
    let Some(start) = instant_arg(ctx.get_raw(0), "start")? else {
        return Ok(None);
    };
    let Some(end) = instant_arg(ctx.get_raw(1), "end")? else {
        return Ok(None);
    };
    let unit = if ctx.len() > 2 {
        match ctx.get_raw(2) {
            ValueRef::Null => return Ok(None),
            ValueRef::Text(t) => usage::unit_seconds(&String::from_utf8_lossy(t))?,
            other => {
                return Err(LifeError::bad(
                    "unit",
                    "must be 'seconds', 'minutes', 'hours' or 'days'",
                    describe(other),
                ))
            }
        }
    } else {
        3600.0
    };
    usage::elapsed(start, end, unit).map(Some)
}

/// Registers every lifedata function on `conn`.
pub fn register(conn: &Connection) -> Result<()> {
    for n_args in [2, 3] {
        conn.create_window_function(FIT, n_args, flags(), LifeFit)?;
    }
    model_scalar(conn, "life_quantile", ["p"], probability, |m, [p]| {
        Ok(Some(m.dist.quantile(p)))
    })?;
    model_scalar(conn, "life_cdf", ["t"], age_like, |m, [t]| {
        Ok(Some(m.dist.cdf(t)))
    })?;
    model_scalar(conn, "life_reliability", ["t"], age_like, |m, [t]| {
        Ok(Some(m.dist.sf(t)))
    })?;
    model_scalar(conn, "life_pdf", ["t"], age_like, |m, [t]| {
        Ok(Some(m.dist.pdf(t)))
    })?;
    model_scalar(conn, "life_hazard", ["t"], age_like, |m, [t]| {
        Ok(Some(m.dist.hazard(t)))
    })?;
    model_scalar(conn, "life_mean", [], any_finite, |m, []| {
        Ok(Some(m.dist.mean()))
    })?;
    model_scalar(
        conn,
        "life_cond_fail",
        ["age", "horizon"],
        age_like,
        |m, [age, horizon]| Ok(Some(m.dist.cond_fail(age, horizon))),
    )?;
    model_scalar(
        conn,
        "life_replace_age",
        ["cost_planned", "cost_failure"],
        any_finite,
        |m, [cp, cf]| decide::optimal_replacement_age(m.dist.as_ref(), cp, cf),
    )?;
    for n_args in [2, 3] {
        conn.create_scalar_function("life_usage", n_args, flags(), |ctx| {
            life_usage(ctx).map_err(|e| user_error("life_usage", e))
        })?;
    }
    Ok(())
}
