//! Registration of every SQL function with SQLite.
//!
//! Argument parsing, NULL handling, error messages that name the function,
//! and per-statement caching of parsed models. No formulas live here: each
//! function hands validated numbers to `fit`, `dist`, `decide` or `usage`.

use crate::decide::{self, policy, renewal};
use crate::error::{show_number, LifeError};
use crate::fit::{self, bounds, compare, km, FitOptions};
use crate::model::Model;
use crate::sample::{Obs, Sample};
use crate::usage;
use rusqlite::functions::{Context, FunctionFlags};
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
    Error::UserFunctionError(error_text(func, e).into())
}

/// An error message that starts with the function name (NUL bytes shown
/// as \0: SQLite's C interface ends the message at a NUL).
pub(crate) fn error_text(func: &str, e: impl std::fmt::Display) -> String {
    format!("{func}: {e}").replace('\0', "\\0")
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

/// A model's text with its parsed form.
type RecentModel = (Box<[u8]>, Arc<Model>);

thread_local! {
    /// Recently parsed models on this thread, most recent first, keyed by
    /// their exact text. SQLite keeps auxiliary data only for constant
    /// arguments, so a model arriving as a column of a joined row would be
    /// parsed on every row; measured with tests/bench, that made readers 2.5
    /// to 4 times slower than plain SQL. A handful of entries covers the
    /// usual per-class join; comparing the bytes keeps it exact.
    static RECENT_MODELS: std::cell::RefCell<Vec<RecentModel>> =
        const { std::cell::RefCell::new(Vec::new()) };
}

/// Most models a thread keeps parsed.
const RECENT_MODELS_KEPT: usize = 16;

/// Parses model text, or returns the same text's model parsed recently on
/// this thread (moved to the front of the list); the flag is true when the
/// text was parsed now.
fn parse_model_cached(
    bytes: &[u8],
    func: &'static str,
) -> std::result::Result<(Arc<Model>, bool), String> {
    let hit = RECENT_MODELS.with(|c| {
        let mut c = c.borrow_mut();
        let i = c.iter().position(|(k, _)| k.as_ref() == bytes)?;
        if i > 0 {
            let entry = c.remove(i);
            c.insert(0, entry);
        }
        Some((c[0].1.clone(), false))
    });
    if let Some(found) = hit {
        return Ok(found);
    }
    let text = std::str::from_utf8(bytes)
        .map_err(|_| format!("{func}: model is not UTF-8 text as life_fit returns"))?;
    let model = Arc::new(Model::parse(text).map_err(|e| format!("{func}: {e}"))?);
    RECENT_MODELS.with(|c| {
        let mut c = c.borrow_mut();
        c.insert(0, (bytes.into(), model.clone()));
        c.truncate(RECENT_MODELS_KEPT);
    });
    Ok((model, true))
}

/// The model argument at `idx`: parsed once per statement when it is a
/// constant (SQLite auxiliary data), and otherwise taken from this thread's
/// small cache of recently parsed models; None for NULL.
fn model_arg(ctx: &Context<'_>, idx: usize, func: &'static str) -> Result<Option<Arc<Model>>> {
    match ctx.get_raw(idx) {
        ValueRef::Null => Ok(None),
        ValueRef::Text(bytes) | ValueRef::Blob(bytes) => {
            if let Some(m) = ctx.get_aux::<Arc<Model>>(idx as i32)? {
                return Ok(Some(Arc::clone(&m)));
            }
            let (m, fresh) = parse_model_cached(bytes, func)
                .map_err(|e| Error::UserFunctionError(e.replace('\0', "\\0").into()))?;
            // Only a model parsed just now is stored as auxiliary data. One
            // found among the recent models is either not a constant (SQLite
            // drops its auxiliary data on every row, so storing it would
            // cost an allocation and a free per row: 14% of a joined
            // reader's instructions, measured with callgrind) or a constant
            // seen in an earlier statement, found again at the front of the
            // recent list as cheaply as auxiliary data.
            if fresh {
                ctx.set_aux(idx as i32, Arc::clone(&m))?;
            }
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

/// The shape of an aggregate's arguments.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Form {
    /// (age, failed [, options])
    AgeFailed,
    /// (earliest, latest [, entry [, count [, options]]])
    Interval,
}

/// What an aggregate returns.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Output {
    /// One model.
    Model,
    /// Every family, ranked.
    Ranking,
    /// Likelihood-ratio comparison of groups (first argument: the group).
    Groups,
    /// Kaplan-Meier steps.
    KaplanMeier,
}

/// A life-data aggregate: which arguments it reads and what it returns.
pub(crate) struct LifeAggregate {
    pub(crate) name: &'static str,
    form: Form,
    output: Output,
}

/// Running state of a life-data aggregate for one group or window frame.
#[derive(Default)]
pub(crate) struct State {
    sample: Sample,
    /// Per-group samples (group comparison only), in name order.
    groups: std::collections::BTreeMap<String, Sample>,
    skipped: u64,
    options: Option<(Vec<u8>, FitOptions)>,
    km_options: Option<km::KmOptions>,
}

impl LifeAggregate {
    /// Index of the first data argument (after the group, if any).
    fn first(&self) -> usize {
        usize::from(self.output == Output::Groups)
    }

    /// Index of the options argument.
    fn options_at(&self) -> usize {
        self.first()
            + match self.form {
                Form::AgeFailed => 2,
                Form::Interval => 4,
            }
    }

    /// Reads the options argument, checking it is the same on every row.
    #[inline]
    fn read_options(
        &self,
        args: &[ValueRef<'_>],
        st: &mut State,
    ) -> std::result::Result<(), LifeError> {
        let Some(&options) = args.get(self.options_at()) else {
            return Ok(());
        };
        if let (Some((seen, _)), ValueRef::Text(t)) = (&st.options, options) {
            if seen.as_slice() == t {
                return Ok(());
            }
        }
        self.first_options(options, st)
    }

    /// [`LifeAggregate::read_options`] for options not seen before.
    #[inline(never)]
    fn first_options(
        &self,
        options: ValueRef<'_>,
        st: &mut State,
    ) -> std::result::Result<(), LifeError> {
        match options {
            ValueRef::Null => Ok(()),
            ValueRef::Text(t) => match &st.options {
                Some((seen, _)) if seen.as_slice() == t => Ok(()),
                Some(_) => Err(LifeError::BadOptions(
                    "must be the same on every row of a group".into(),
                )),
                None => {
                    let text = std::str::from_utf8(t)
                        .map_err(|_| LifeError::BadOptions("are not UTF-8 text".into()))?;
                    if self.output == Output::KaplanMeier {
                        st.km_options = Some(km::KmOptions::parse(text)?);
                        st.options = Some((t.to_vec(), FitOptions::default()));
                    } else {
                        st.options = Some((t.to_vec(), FitOptions::parse(text)?));
                    }
                    Ok(())
                }
            },
            other => Err(LifeError::BadOptions(format!(
                "must be JSON text such as '{{\"dist\":\"weibull\"}}', got {}",
                describe(other)
            ))),
        }
    }

    /// Reads one row: None when it is skipped (a NULL age).
    fn row(
        &self,
        args: &[ValueRef<'_>],
        st: &mut State,
    ) -> std::result::Result<Option<(Option<String>, Obs)>, LifeError> {
        self.read_options(args, st)?;
        let group = if self.output == Output::Groups {
            match args[0] {
                ValueRef::Null => return Ok(None),
                ValueRef::Integer(i) => Some(i.to_string()),
                ValueRef::Real(r) => Some(show_number(r)),
                ValueRef::Text(t) => Some(String::from_utf8_lossy(t).into_owned()),
                ValueRef::Blob(b) => {
                    return Err(LifeError::bad(
                        "group",
                        "must be text or a number",
                        format!("a blob of {} bytes", b.len()),
                    ))
                }
            }
        } else {
            None
        };
        let f = self.first();
        let obs = match self.form {
            Form::AgeFailed => {
                let Some(age) = number(args[f], "age")? else {
                    return Ok(None);
                };
                let age = age_like("age", age)?;
                let failed = match args[f + 1] {
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
                if failed && age == 0.0 {
                    return Err(LifeError::bad("age", "must be > 0 for a failure", "0"));
                }
                // Already validated: build the observation directly (this is
                // the per-row hot path of life_fit).
                Obs {
                    earliest: age + 0.0,
                    latest: if failed { age + 0.0 } else { f64::INFINITY },
                    entry: 0.0,
                    count: 1.0,
                }
            }
            Form::Interval => {
                let earliest = number(args[f], "earliest")?;
                let latest = number(args[f + 1], "latest")?;
                let entry = if args.len() > f + 2 {
                    number(args[f + 2], "entry")?.unwrap_or(0.0)
                } else {
                    0.0
                };
                let count = if args.len() > f + 3 {
                    match number(args[f + 3], "count")? {
                        None => return Ok(None),
                        Some(0.0) => return Ok(None),
                        Some(c) if c >= 1.0 && c.fract() == 0.0 && c <= 1e15 => c as u64,
                        Some(c) => {
                            return Err(LifeError::bad(
                                "count",
                                "must be a whole number from 0 to 1e15",
                                show_number(c),
                            ))
                        }
                    }
                } else {
                    1
                };
                match (earliest, latest) {
                    (None, None) => return Ok(None),
                    (None, Some(l)) => Sample::observation(0.0, Some(l), entry, count)?,
                    (Some(e), l) => Sample::observation(e, l, entry, count)?,
                }
            }
        };
        Ok(Some((group, obs)))
    }

    fn options(st: &State) -> FitOptions {
        st.options
            .as_ref()
            .map(|(_, o)| o.clone())
            .unwrap_or_default()
    }

    /// The aggregate's value for the rows seen so far.
    pub(crate) fn result(&self, st: &State) -> std::result::Result<Option<String>, LifeError> {
        let opts = Self::options(st);
        let out = match self.output {
            Output::Model => {
                if st.sample.is_empty() {
                    return Ok(None);
                }
                fit::fit(&st.sample, &opts, st.skipped).map(|m| m.to_json())
            }
            Output::Ranking => {
                if st.sample.is_empty() {
                    return Ok(None);
                }
                Ok(ranking_json(&compare::rank_families(
                    &st.sample, &opts, st.skipped,
                )))
            }
            Output::KaplanMeier => {
                if st.sample.is_empty() {
                    return Ok(None);
                }
                let o = st.km_options.unwrap_or_default();
                km::kaplan_meier(&st.sample.obs(), o.conf, o.band).map(|steps| {
                    serde_json::Value::Array(
                        steps
                            .iter()
                            .map(|s| {
                                serde_json::json!({
                                    "age": s.age,
                                    "at_risk": s.at_risk,
                                    "failures": s.failures,
                                    "reliability": s.reliability,
                                    "variance": s.variance,
                                    "lower": s.lower,
                                    "upper": s.upper,
                                })
                            })
                            .collect(),
                    )
                    .to_string()
                })
            }
            Output::Groups => {
                if st.groups.is_empty() {
                    return Ok(None);
                }
                let groups: Vec<(String, Sample)> = st
                    .groups
                    .iter()
                    .map(|(k, v)| (k.clone(), v.clone()))
                    .collect();
                compare::compare_groups(&groups, &opts).map(|c| comparison_json(&c))
            }
        };
        out.map(Some)
    }
}

fn ranking_json(ranked: &[compare::Ranked]) -> String {
    let rows: Vec<serde_json::Value> = ranked
        .iter()
        .enumerate()
        .map(|(i, r)| match &r.outcome {
            Ok(x) => serde_json::json!({
                "rank": i + 1,
                "dist": r.dist,
                "k": x.k,
                "loglik": x.loglik,
                "aicc": x.aicc,
                "bic": x.bic,
                "model": serde_json::from_str::<serde_json::Value>(&x.model.to_json())
                    .unwrap_or(serde_json::Value::Null),
            }),
            Err(reason) => serde_json::json!({
                "rank": i + 1,
                "dist": r.dist,
                "refused": reason,
            }),
        })
        .collect();
    serde_json::Value::Array(rows).to_string()
}

fn comparison_json(c: &compare::GroupComparison) -> String {
    let test = |t: &compare::Test| serde_json::json!({"statistic": t.statistic, "df": t.df, "p_value": t.p_value});
    let names: Vec<&str> = c.family.params.iter().map(|p| p.name).collect();
    let params = |p: &[f64]| -> serde_json::Value {
        names
            .iter()
            .zip(p)
            .map(|(n, v)| (n.to_string(), serde_json::json!(v)))
            .collect::<serde_json::Map<_, _>>()
            .into()
    };
    serde_json::json!({
        "dist": c.family.name,
        "groups": c.groups.iter().map(|(name, m)| {
            let mut g = params(&m.dist.params());
            if let (Some(obj), Some(f)) = (g.as_object_mut(), m.fit.as_ref()) {
                obj.insert("group".into(), serde_json::json!(name));
                obj.insert("n".into(), serde_json::json!(f.n));
                obj.insert("loglik".into(), serde_json::json!(f.loglik));
            }
            g
        }).collect::<Vec<_>>(),
        "pooled_loglik": c.pooled_loglik,
        "separate_loglik": c.separate_loglik,
        "common_shape_loglik": c.common_shape_loglik,
        "common_shape": c.common_shape_params.iter().map(|(name, p)| {
            let mut g = params(p);
            if let Some(obj) = g.as_object_mut() {
                obj.insert("group".into(), serde_json::json!(name));
            }
            g
        }).collect::<Vec<_>>(),
        "tests": {
            "same_distribution": test(&c.same_distribution),
            "common_shape": test(&c.common_shape),
            "same_scale_given_common_shape": test(&c.same_scale_given_common_shape),
        },
    })
    .to_string()
}

impl LifeAggregate {
    /// Adds one row to the state.
    pub(crate) fn step(
        &self,
        args: &[ValueRef<'_>],
        st: &mut State,
    ) -> std::result::Result<(), LifeError> {
        // The per-row hot path of life_fit and life_fit_all: a clean
        // (age, failed) row goes straight into the sample. Anything else
        // (NULLs, text, out-of-range values) takes the general path below,
        // which holds every check and error message.
        if self.form == Form::AgeFailed && self.output != Output::Groups && args.len() >= 2 {
            self.read_options(args, st)?;
            let age = match args[0] {
                ValueRef::Real(a) => a,
                ValueRef::Integer(a) => a as f64,
                _ => f64::NAN,
            };
            let failed = match args[1] {
                ValueRef::Integer(f) => f,
                ValueRef::Real(f) if f == 0.0 || f == 1.0 => f as i64,
                _ => -1,
            };
            if age.is_finite() && (failed == 0 && age >= 0.0 || failed == 1 && age > 0.0) {
                return st.sample.add_unit(age, failed == 1);
            }
        }
        match self.row(args, st)? {
            None => st.skipped += 1,
            Some((group, o)) => match group {
                Some(g) => st.groups.entry(g).or_default().push(o)?,
                None => st.sample.push(o)?,
            },
        }
        Ok(())
    }

    /// Removes one row from the state (a window frame moving on).
    pub(crate) fn inverse(
        &self,
        args: &[ValueRef<'_>],
        st: &mut State,
    ) -> std::result::Result<(), LifeError> {
        match self.row(args, st)? {
            None => st.skipped = st.skipped.saturating_sub(1),
            Some((group, o)) => {
                let target = match group {
                    Some(g) => st.groups.entry(g).or_default(),
                    None => &mut st.sample,
                };
                target.pull(o)?;
            }
        }
        Ok(())
    }
}

/// Registers a life-data aggregate for each of its argument counts.
fn aggregate(conn: &Connection, agg: LifeAggregate) -> Result<()> {
    let base = agg.first()
        + match agg.form {
            Form::AgeFailed => 2,
            Form::Interval => 2,
        };
    let most = agg.options_at() + 1;
    for n in base..=most {
        crate::sql_aggregate::register(
            conn,
            n as i32,
            flags(),
            LifeAggregate {
                name: agg.name,
                form: agg.form,
                output: agg.output,
            },
        )?;
    }
    Ok(())
}

/// What a bound reader's second argument names.
#[derive(Clone, Copy)]
enum What {
    /// A parameter name.
    Param,
    /// A failed fraction p (percentile life).
    Quantile,
    /// An age t (reliability).
    Reliability,
}

/// `life_{param,quantile,reliability}_{lower,upper}(model, x [, conf [, sides [, method]]])`.
fn bound_reader(
    ctx: &Context<'_>,
    func: &'static str,
    what: What,
    side: bounds::Side,
) -> Result<Option<f64>> {
    let err = |e: LifeError| user_error(func, e);
    if (0..ctx.len()).any(|i| matches!(ctx.get_raw(i), ValueRef::Null)) {
        return Ok(None);
    }
    let conf = if ctx.len() > 2 {
        number(ctx.get_raw(2), "conf").map_err(err)?.unwrap_or(0.95)
    } else {
        0.95
    };
    let sides = if ctx.len() > 3 {
        match ctx.get_raw(3) {
            ValueRef::Integer(i) => i,
            ValueRef::Real(r) if r.fract() == 0.0 && r.abs() < 1e6 => r as i64,
            other => {
                return Err(err(LifeError::bad(
                    "sides",
                    "must be 1 or 2",
                    describe(other),
                )))
            }
        }
    } else {
        2
    };
    let level = bounds::Level::new(conf, sides).map_err(err)?;
    let method_name = if ctx.len() > 4 {
        match ctx.get_raw(4) {
            ValueRef::Text(t) => Some(String::from_utf8_lossy(t).into_owned()),
            other => {
                return Err(err(LifeError::bad(
                    "method",
                    "must be 'fisher', 'lr' or 'chi2'",
                    describe(other),
                )))
            }
        }
    } else {
        None
    };
    let method = method_name
        .as_deref()
        .map(bounds::BoundMethod::parse)
        .transpose()
        .map_err(err)?;
    let quantity = match what {
        What::Param => None,
        What::Quantile => {
            let p = number(ctx.get_raw(1), "p")
                .map_err(err)?
                .unwrap_or(f64::NAN);
            Some(bounds::Quantity::Quantile(
                probability("p", p).map_err(err)?,
            ))
        }
        What::Reliability => {
            let t = number(ctx.get_raw(1), "t")
                .map_err(err)?
                .unwrap_or(f64::NAN);
            Some(bounds::Quantity::Reliability(
                age_like("t", t).map_err(err)?,
            ))
        }
    };
    let Some(model) = model_arg(ctx, 0, func)? else {
        return Ok(None);
    };
    let quantity = match quantity {
        Some(q) => q,
        None => {
            let name = match ctx.get_raw(1) {
                ValueRef::Text(t) => String::from_utf8_lossy(t).into_owned(),
                other => {
                    return Err(err(LifeError::bad(
                        "param",
                        "must be a parameter name such as 'shape'",
                        describe(other),
                    )))
                }
            };
            let fam = model.dist.family();
            let i = fam.param_index(&name).ok_or_else(|| {
                err(LifeError::BadArgument {
                    arg: "param",
                    expected: "must name a parameter of the model's family",
                    got: format!(
                        "'{}' for {} (parameters: {})",
                        name.chars().take(40).collect::<String>(),
                        fam.name,
                        fam.params
                            .iter()
                            .map(|p| p.name)
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                })
            })?;
            bounds::Quantity::Param(i)
        }
    };
    let method = method.unwrap_or_else(|| {
        if model.fit.as_ref().is_some_and(|f| f.known.is_some()) {
            bounds::BoundMethod::ChiSquare
        } else {
            bounds::BoundMethod::Fisher
        }
    });
    bounds::bound(&model, quantity, level, method, side)
        .map(Some)
        .map_err(err)
}

/// An optional text argument (None when absent; NULL handled by the caller).
fn text_arg(
    ctx: &Context<'_>,
    i: usize,
    arg: &'static str,
    default: &str,
) -> std::result::Result<String, LifeError> {
    if ctx.len() <= i {
        return Ok(default.to_string());
    }
    match ctx.get_raw(i) {
        ValueRef::Text(t) => Ok(String::from_utf8_lossy(t).into_owned()),
        other => Err(LifeError::bad(arg, "must be text", describe(other))),
    }
}

fn any_null(ctx: &Context<'_>) -> bool {
    (0..ctx.len()).any(|i| matches!(ctx.get_raw(i), ValueRef::Null))
}

/// `life_plot_svg(model [, title [, age_label [, conf]]])`.
fn plot_svg(ctx: &Context<'_>) -> std::result::Result<Option<String>, LifeError> {
    if any_null(ctx) {
        return Ok(None);
    }
    let title = text_arg(ctx, 1, "title", "Probability plot")?;
    let age_label = text_arg(ctx, 2, "age_label", "age")?;
    let conf = if ctx.len() > 3 {
        number(ctx.get_raw(3), "conf")?.unwrap_or(0.95)
    } else {
        0.95
    };
    let m = crate::sql_tables::model_of(Some(ctx.get_raw(0)))?;
    crate::plot::model_probability_svg(&m, &title, &age_label, conf).map(Some)
}

/// `life_cost_svg(model, cost_planned, cost_failure [, title [, age_label]])`.
fn cost_svg(ctx: &Context<'_>) -> std::result::Result<Option<String>, LifeError> {
    if any_null(ctx) {
        return Ok(None);
    }
    let cp = any_finite(
        "cost_planned",
        number(ctx.get_raw(1), "cost_planned")?.unwrap_or(f64::NAN),
    )?;
    let cf = any_finite(
        "cost_failure",
        number(ctx.get_raw(2), "cost_failure")?.unwrap_or(f64::NAN),
    )?;
    let title = text_arg(ctx, 3, "title", "When to replace")?;
    let age_label = text_arg(ctx, 4, "age_label", "replacement age")?;
    let m = crate::sql_tables::model_of(Some(ctx.get_raw(0)))?;
    crate::plot::model_cost_svg(&m, cp, cf, &title, &age_label).map(Some)
}

/// `life_replacement(model, cost_planned, cost_failure [, largest_age [, beyond_factor]])`:
/// the age-replacement verdict as JSON.
fn replacement(ctx: &Context<'_>) -> std::result::Result<Option<String>, LifeError> {
    if any_null(ctx) {
        return Ok(None);
    }
    let arg = |i: usize, name: &'static str| -> std::result::Result<f64, LifeError> {
        any_finite(name, number(ctx.get_raw(i), name)?.unwrap_or(f64::NAN))
    };
    let (cp, cf) = (arg(1, "cost_planned")?, arg(2, "cost_failure")?);
    let largest = if ctx.len() > 3 {
        Some(arg(3, "largest_age")?)
    } else {
        None
    };
    let factor = if ctx.len() > 4 {
        arg(4, "beyond_factor")?
    } else {
        policy::DEFAULT_BEYOND_FACTOR
    };
    let m = crate::sql_tables::model_of(Some(ctx.get_raw(0)))?;
    let v = policy::age_replacement_verdict(m.dist.as_ref(), cp, cf, largest, factor)?;
    Ok(Some(
        serde_json::json!({
            "optimum": v.optimum,
            "cost_rate_at_optimum": v.cost_rate_at_optimum,
            "run_to_failure_rate": v.run_to_failure_rate,
            "saving": v.saving,
            "reason": v.reason,
        })
        .to_string(),
    ))
}

/// `life_block_replacement(model, cost_planned, cost_failure, max_interval)`.
fn block(ctx: &Context<'_>) -> std::result::Result<Option<String>, LifeError> {
    if any_null(ctx) {
        return Ok(None);
    }
    let arg = |i: usize, name: &'static str| -> std::result::Result<f64, LifeError> {
        any_finite(name, number(ctx.get_raw(i), name)?.unwrap_or(f64::NAN))
    };
    let (cp, cf, max_t) = (
        arg(1, "cost_planned")?,
        arg(2, "cost_failure")?,
        arg(3, "max_interval")?,
    );
    let m = crate::sql_tables::model_of(Some(ctx.get_raw(0)))?;
    let d = m.dist.as_ref();
    let best = policy::block_replacement_optimum(d, cp, cf, max_t)?;
    Ok(Some(
        serde_json::json!({
            "interval": best.map(|b| b.0),
            "cost_rate": best.map(|b| b.1),
            "run_to_failure_rate": cf / d.mean(),
        })
        .to_string(),
    ))
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
    for (name, form, output) in [
        ("life_fit", Form::AgeFailed, Output::Model),
        ("life_fit_interval", Form::Interval, Output::Model),
        ("life_fit_all", Form::AgeFailed, Output::Ranking),
        ("life_fit_all_interval", Form::Interval, Output::Ranking),
        ("life_compare", Form::AgeFailed, Output::Groups),
        ("life_compare_interval", Form::Interval, Output::Groups),
        ("life_km", Form::AgeFailed, Output::KaplanMeier),
        ("life_km_interval", Form::Interval, Output::KaplanMeier),
    ] {
        aggregate(conn, LifeAggregate { name, form, output })?;
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
    for (name, what, side) in [
        ("life_param_lower", What::Param, bounds::Side::Lower),
        ("life_param_upper", What::Param, bounds::Side::Upper),
        ("life_quantile_lower", What::Quantile, bounds::Side::Lower),
        ("life_quantile_upper", What::Quantile, bounds::Side::Upper),
        (
            "life_reliability_lower",
            What::Reliability,
            bounds::Side::Lower,
        ),
        (
            "life_reliability_upper",
            What::Reliability,
            bounds::Side::Upper,
        ),
    ] {
        for n_args in 2..=5 {
            conn.create_scalar_function(name, n_args, flags(), move |ctx| {
                bound_reader(ctx, name, what, side)
            })?;
        }
    }
    crate::sql_tables::register_tables(conn)?;
    for n_args in 3..=5 {
        conn.create_scalar_function("life_replacement", n_args, flags(), |ctx| {
            replacement(ctx).map_err(|e| user_error("life_replacement", e))
        })?;
    }
    model_scalar(
        conn,
        "life_availability_age",
        ["downtime_planned", "downtime_failure"],
        any_finite,
        |m, [tp, tf]| policy::availability_optimum(m.dist.as_ref(), tp, tf),
    )?;
    model_scalar(conn, "life_renewal", ["t"], age_like, |m, [t]| {
        renewal::renewal_function(m.dist.as_ref(), t).map(Some)
    })?;
    conn.create_scalar_function("life_block_replacement", 4, flags(), |ctx| {
        block(ctx).map_err(|e| user_error("life_block_replacement", e))
    })?;
    for n_args in [3, 4] {
        conn.create_window_function(
            "life_forecast",
            n_args,
            flags(),
            crate::sql_forecast::LifeForecast,
        )?;
    }
    for n_args in 1..=4 {
        conn.create_scalar_function("life_plot_svg", n_args, flags(), |ctx| {
            plot_svg(ctx).map_err(|e| user_error("life_plot_svg", e))
        })?;
    }
    for n_args in 3..=5 {
        conn.create_scalar_function("life_cost_svg", n_args, flags(), |ctx| {
            cost_svg(ctx).map_err(|e| user_error("life_cost_svg", e))
        })?;
    }
    for n_args in [2, 3] {
        conn.create_scalar_function("life_usage", n_args, flags(), |ctx| {
            life_usage(ctx).map_err(|e| user_error("life_usage", e))
        })?;
    }
    Ok(())
}
