//! Table-valued functions: a model expanded into rows for dashboards.
//!
//! Each function is an eponymous virtual table whose arguments are hidden
//! columns, so it reads naturally in SQL:
//! `SELECT * FROM life_curve(model, 0, 5000)`. The rows are computed once
//! when the table is opened (they are few: curve points, plot points) and
//! then handed out one by one. Like the `sql` module this layer only
//! translates arguments and errors; the numbers come from `dist`, `fit` and
//! `decide`.

use crate::error::{show_number, LifeError, LifeResult};
use crate::model::Model;
use rusqlite::types::{Value, ValueRef};
use rusqlite::vtab::{
    Context, Filters, IndexConstraintOp, IndexInfo, Module, VTab, VTabConfig, VTabConnection,
    VTabCursor,
};
use rusqlite::{ffi, Connection, Result};
use std::borrow::Cow;
use std::ffi::{c_int, CStr, CString};
use std::marker::PhantomData;

/// Rows produced by a table function.
pub type Rows = Vec<Vec<Value>>;

/// A table-valued function: its output columns, its arguments and how it
/// computes its rows from them.
pub struct TableSpec {
    /// SQL name.
    pub name: &'static str,
    /// Output columns.
    pub columns: &'static [&'static str],
    /// Arguments, in call order (hidden columns of the table).
    pub args: &'static [&'static str],
    /// How many leading arguments are required.
    pub required: usize,
    /// Computes the rows; arguments not given are None.
    pub produce: fn(&[Option<ValueRef<'_>>]) -> LifeResult<Rows>,
}

/// The virtual table of one table function.
#[repr(C)]
struct LifeTable {
    /// Base class; must be first.
    base: ffi::sqlite3_vtab,
    spec: &'static TableSpec,
}

unsafe impl<'vtab> VTab<'vtab> for LifeTable {
    type Aux = &'static TableSpec;
    type Cursor = LifeCursor<'vtab>;

    fn connect(
        db: &mut VTabConnection,
        aux: Option<&&'static TableSpec>,
        _module_name: &[u8],
        _database_name: &[u8],
        _table_name: &[u8],
        _args: &[&[u8]],
    ) -> Result<(Cow<'static, CStr>, Self)> {
        let spec = *aux.ok_or_else(|| rusqlite::Error::ModuleError("missing table spec".into()))?;
        db.config(VTabConfig::Innocuous)?;
        let mut cols: Vec<String> = spec.columns.iter().map(|c| c.to_string()).collect();
        cols.extend(spec.args.iter().map(|a| format!("{a} HIDDEN")));
        let schema = CString::new(format!("CREATE TABLE x({})", cols.join(", ")))
            .map_err(|e| rusqlite::Error::ModuleError(e.to_string()))?;
        Ok((
            Cow::Owned(schema),
            LifeTable {
                base: ffi::sqlite3_vtab::default(),
                spec,
            },
        ))
    }

    fn best_index(&self, info: &mut IndexInfo) -> Result<bool> {
        let n_out = self.spec.columns.len() as c_int;
        // For each argument column, the constraint that supplies it.
        let mut supplied: Vec<Option<usize>> = vec![None; self.spec.args.len()];
        let mut unusable = false;
        for (i, c) in info.constraints().enumerate() {
            let col = c.column();
            if col < n_out {
                continue;
            }
            let arg = (col - n_out) as usize;
            if !c.is_usable() {
                unusable = true;
            } else if c.operator() == IndexConstraintOp::SQLITE_INDEX_CONSTRAINT_EQ {
                supplied[arg] = Some(i);
            }
        }
        let mut mask = 0;
        let mut argv = 0;
        for (arg, c) in supplied.iter().enumerate() {
            if let Some(i) = c {
                argv += 1;
                let mut usage = info.constraint_usage(*i);
                usage.set_argv_index(argv);
                usage.set_omit(true);
                mask |= 1 << arg;
            }
        }
        if unusable && mask == 0 {
            return Ok(false);
        }
        info.set_idx_num(mask);
        info.set_estimated_cost(if mask & 1 == 1 { 10.0 } else { 1e12 });
        info.set_estimated_rows(100);
        Ok(true)
    }

    fn open(&mut self) -> Result<LifeCursor<'_>> {
        Ok(LifeCursor {
            base: ffi::sqlite3_vtab_cursor::default(),
            spec: self.spec,
            rows: Vec::new(),
            args: Vec::new(),
            pos: 0,
            phantom: PhantomData,
        })
    }
}

/// A cursor over the computed rows.
#[repr(C)]
struct LifeCursor<'vtab> {
    /// Base class; must be first.
    base: ffi::sqlite3_vtab_cursor,
    spec: &'static TableSpec,
    rows: Rows,
    /// The arguments as given (for the hidden columns).
    args: Vec<Value>,
    pos: usize,
    phantom: PhantomData<&'vtab LifeTable>,
}

unsafe impl VTabCursor for LifeCursor<'_> {
    fn filter(&mut self, idx_num: c_int, _idx_str: Option<&str>, args: &Filters<'_>) -> Result<()> {
        let spec = self.spec;
        let mut given: Vec<Option<ValueRef<'_>>> = vec![None; spec.args.len()];
        let mut values = args.iter();
        for (arg, slot) in given.iter_mut().enumerate() {
            if idx_num & (1 << arg) != 0 {
                *slot = values.next();
            }
        }
        self.args = given
            .iter()
            .map(|v| match v {
                Some(ValueRef::Integer(i)) => Value::Integer(*i),
                Some(ValueRef::Real(r)) => Value::Real(*r),
                Some(ValueRef::Text(t)) => Value::Text(String::from_utf8_lossy(t).into_owned()),
                Some(ValueRef::Blob(b)) => Value::Blob(b.to_vec()),
                _ => Value::Null,
            })
            .collect();
        self.pos = 0;
        self.rows.clear();
        if let Some(missing) = (0..spec.required).find(|&i| given[i].is_none()) {
            return Err(user_error(
                spec.name,
                format!(
                    "needs its {} argument: {}({})",
                    spec.args[missing],
                    spec.name,
                    spec.args.join(", ")
                ),
            ));
        }
        // NULL in, no rows out.
        if given.iter().any(|v| matches!(v, Some(ValueRef::Null))) {
            return Ok(());
        }
        self.rows = (spec.produce)(&given).map_err(|e| user_error(spec.name, e))?;
        Ok(())
    }

    fn next(&mut self) -> Result<()> {
        self.pos += 1;
        Ok(())
    }

    fn eof(&self) -> bool {
        self.pos >= self.rows.len()
    }

    fn column(&self, ctx: &mut Context, i: c_int) -> Result<()> {
        let i = i as usize;
        let n_out = self.spec.columns.len();
        if i < n_out {
            ctx.set_result(&self.rows[self.pos][i])
        } else {
            ctx.set_result(&self.args.get(i - n_out).cloned().unwrap_or(Value::Null))
        }
    }

    fn rowid(&self) -> Result<i64> {
        Ok(self.pos as i64 + 1)
    }
}

fn user_error(func: &str, e: impl std::fmt::Display) -> rusqlite::Error {
    rusqlite::Error::ModuleError(crate::sql::error_text(func, e))
}

/// Registers a table function.
pub fn register_table(conn: &Connection, spec: &'static TableSpec) -> Result<()> {
    // One module value per table type; the spec travels as auxiliary data.
    const MODULE: Module<'static, LifeTable> = Module::eponymous_only_module();
    conn.create_module(spec.name, &MODULE, Some(spec))
}

/// Reads a model argument.
pub fn model_of(v: Option<ValueRef<'_>>) -> LifeResult<Model> {
    match v {
        Some(ValueRef::Text(t)) | Some(ValueRef::Blob(t)) => {
            let text = std::str::from_utf8(t)
                .map_err(|_| LifeError::BadModel("is not UTF-8 text as life_fit returns".into()))?;
            Model::parse(text)
        }
        Some(ValueRef::Integer(i)) => Err(LifeError::BadModel(format!(
            "must be JSON text as life_fit returns, got {i}"
        ))),
        Some(ValueRef::Real(r)) => Err(LifeError::BadModel(format!(
            "must be JSON text as life_fit returns, got {}",
            show_number(r)
        ))),
        _ => Err(LifeError::BadModel("is missing".into())),
    }
}

/// Reads an optional numeric argument.
pub fn number_of(v: Option<ValueRef<'_>>, arg: &'static str, default: f64) -> LifeResult<f64> {
    match v {
        None => Ok(default),
        Some(ValueRef::Integer(i)) => Ok(i as f64),
        Some(ValueRef::Real(r)) => Ok(r),
        Some(ValueRef::Text(t)) => Err(LifeError::bad(
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
        Some(other) => Err(LifeError::bad(
            arg,
            "must be a number",
            format!("{other:?}"),
        )),
    }
}

/// Reads an optional text argument.
pub fn text_of(v: Option<ValueRef<'_>>, arg: &'static str, default: &str) -> LifeResult<String> {
    match v {
        None => Ok(default.to_string()),
        Some(ValueRef::Text(t)) => Ok(String::from_utf8_lossy(t).into_owned()),
        Some(ValueRef::Integer(i)) => Err(LifeError::bad(arg, "must be text", i)),
        Some(ValueRef::Real(r)) => Err(LifeError::bad(arg, "must be text", show_number(r))),
        Some(other) => Err(LifeError::bad(arg, "must be text", format!("{other:?}"))),
    }
}

use crate::fit::bounds::{bound, BoundMethod, Level, Quantity, Side};
use crate::fit::rank;

/// Ages from `from` to `to`: log- or linear-spaced.
fn grid(from: f64, to: f64, points: usize, log: bool) -> Vec<f64> {
    (0..points)
        .map(|i| {
            let u = i as f64 / (points - 1) as f64;
            if i == 0 {
                from
            } else if i == points - 1 {
                to
            } else if log {
                (from.ln() + u * (to.ln() - from.ln())).exp()
            } else {
                from + u * (to - from)
            }
        })
        .collect()
}

/// Fisher-matrix bounds on the reliability at `t`, when the model has a covariance.
fn reliability_band(m: &Model, t: f64, level: Level) -> (Value, Value) {
    let has_cov = m.fit.as_ref().is_some_and(|f| !f.cov.is_empty());
    if !has_cov {
        return (Value::Null, Value::Null);
    }
    let b = |side| {
        bound(
            m,
            Quantity::Reliability(t),
            level,
            BoundMethod::Fisher,
            side,
        )
        .map_or(Value::Null, Value::Real)
    };
    (b(Side::Lower), b(Side::Upper))
}

fn real(x: f64) -> Value {
    if x.is_nan() {
        Value::Null
    } else {
        Value::Real(x)
    }
}

/// `life_curve(model, t_from, t_to [, points [, spacing [, conf]]])`.
pub static CURVE: TableSpec = TableSpec {
    name: "life_curve",
    columns: &[
        "age",
        "unreliability",
        "reliability",
        "density",
        "hazard",
        "reliability_lower",
        "reliability_upper",
    ],
    args: &["model", "t_from", "t_to", "points", "spacing", "conf"],
    required: 3,
    produce: |a| {
        let m = model_of(a[0])?;
        let from = number_of(a[1], "t_from", 0.0)?;
        let to = number_of(a[2], "t_to", 0.0)?;
        let points = number_of(a[3], "points", 50.0)?;
        let spacing = text_of(a[4], "spacing", "linear")?;
        let conf = number_of(a[5], "conf", 0.95)?;
        if !(from.is_finite() && from >= 0.0) {
            return Err(LifeError::bad(
                "t_from",
                "must be a finite number >= 0",
                show_number(from),
            ));
        }
        if !(to.is_finite() && to > from) {
            return Err(LifeError::bad(
                "t_to",
                "must be a finite number above t_from",
                show_number(to),
            ));
        }
        if !(points.fract() == 0.0 && (2.0..=100_000.0).contains(&points)) {
            return Err(LifeError::bad(
                "points",
                "must be a whole number from 2 to 100000",
                show_number(points),
            ));
        }
        let log = match spacing.as_str() {
            "log" => true,
            "linear" => false,
            other => {
                return Err(LifeError::bad(
                    "spacing",
                    "must be 'linear' or 'log'",
                    format!("'{}'", other.chars().take(20).collect::<String>()),
                ))
            }
        };
        if log && from <= 0.0 {
            return Err(LifeError::bad(
                "t_from",
                "must be > 0 for log spacing",
                show_number(from),
            ));
        }
        let level = Level::new(conf, 2)?;
        Ok(grid(from, to, points as usize, log)
            .into_iter()
            .map(|t| {
                let d = m.dist.as_ref();
                let (lo, hi) = reliability_band(&m, t, level);
                vec![
                    Value::Real(t),
                    real(d.cdf(t)),
                    real(d.sf(t)),
                    real(d.pdf(t)),
                    real(d.hazard(t)),
                    lo,
                    hi,
                ]
            })
            .collect())
    },
};

/// Most failed units `life_plot_points` plots.
const MAX_PLOT_POINTS: f64 = 100_000.0;

/// `life_plot_points(model [, conf [, ranks]])`: probability-plot rows.
pub static PLOT_POINTS: TableSpec = TableSpec {
    name: "life_plot_points",
    columns: &[
        "kind",
        "age",
        "position",
        "x",
        "y",
        "fit_position",
        "fit_y",
        "lower_position",
        "upper_position",
        "lower_y",
        "upper_y",
    ],
    args: &["model", "conf", "ranks"],
    required: 1,
    produce: |a| {
        let m = model_of(a[0])?;
        let conf = number_of(a[1], "conf", 0.95)?;
        let level = Level::new(conf, 2)?;
        let positions = match text_of(a[2], "ranks", "bernard")?.as_str() {
            "bernard" => rank::Positions::Bernard,
            "exact" => rank::Positions::Exact,
            other => {
                return Err(LifeError::bad(
                    "ranks",
                    "must be 'bernard' or 'exact'",
                    format!("'{}'", other.chars().take(20).collect::<String>()),
                ))
            }
        };
        let fam = m.dist.family();
        let lin = fam.linear.as_ref().ok_or_else(|| {
            LifeError::NotEstimable(format!(
                "the {} family has no straight-line probability plot",
                fam.name
            ))
        })?;
        let obs = m
            .fit
            .as_ref()
            .and_then(|f| f.sample.as_ref())
            .ok_or_else(|| {
                LifeError::NotEstimable(
                    "plot points need the data: fit with options {\"keep_sample\": true}".into(),
                )
            })?;
        // One row per failed unit, each held until SQLite has read it
        // (about 400 bytes a row, measured: 443 MB at 1e6 rows): a plot
        // for a dashboard needs far fewer.
        let failed_units: f64 = obs.iter().filter(|o| o.failed()).map(|o| o.count).sum();
        if failed_units > MAX_PLOT_POINTS {
            return Err(LifeError::NotEstimable(format!(
                "plots one point per failed unit, at most {MAX_PLOT_POINTS}; this model \
                 holds {} failed units (plot a sample of them, or draw the fitted line \
                 with life_curve)",
                show_number(failed_units)
            )));
        }
        let d = m.dist.as_ref();
        let y_of = |f: f64| real((lin.y)(f));
        // The fitted line and its band at an age.
        let fit_cols = |t: f64| -> Vec<Value> {
            let (lo_r, hi_r) = reliability_band(&m, t, level);
            let lower_f = match hi_r {
                Value::Real(r) => Some(1.0 - r),
                _ => None,
            };
            let upper_f = match lo_r {
                Value::Real(r) => Some(1.0 - r),
                _ => None,
            };
            let f = d.cdf(t);
            vec![
                real(f),
                y_of(f),
                lower_f.map_or(Value::Null, real),
                upper_f.map_or(Value::Null, real),
                lower_f.map_or(Value::Null, y_of),
                upper_f.map_or(Value::Null, y_of),
            ]
        };
        let mut rows = Vec::new();
        for p in rank::plotting_positions(obs, positions)? {
            let mut row = vec![
                Value::Text("failure".into()),
                Value::Real(p.age),
                real(p.unreliability),
                real((lin.x)(p.age)),
                y_of(p.unreliability),
            ];
            row.extend(fit_cols(p.age));
            rows.push(row);
        }
        let (mut lo, mut hi) = (f64::INFINITY, 0.0f64);
        for o in obs {
            lo = lo.min(o.earliest.max(f64::MIN_POSITIVE));
            hi = hi.max(o.earliest);
            if !o.failed() {
                for _ in 0..(o.count as u64).min(100_000) {
                    let mut row = vec![
                        Value::Text("suspension".into()),
                        Value::Real(o.earliest),
                        Value::Null,
                        real((lin.x)(o.earliest)),
                        Value::Null,
                    ];
                    row.extend(std::iter::repeat_n(Value::Null, 6));
                    rows.push(row);
                }
            }
        }
        // The fitted line across the data, log-spaced for log-age axes.
        if hi > lo {
            let log_axis = ((lin.x)(std::f64::consts::E) - 1.0).abs() < 1e-12;
            let (from, to) = if log_axis {
                (lo * 0.5, hi * 2.0)
            } else {
                (0.0f64.max(lo - 0.1 * (hi - lo)), hi + 0.1 * (hi - lo))
            };
            for t in grid(from, to, 41, log_axis && from > 0.0) {
                let mut row = vec![
                    Value::Text("line".into()),
                    Value::Real(t),
                    Value::Null,
                    real((lin.x)(t)),
                    Value::Null,
                ];
                row.extend(fit_cols(t));
                rows.push(row);
            }
        }
        Ok(rows)
    },
};

/// `life_cost_curve(model, cost_planned, cost_failure [, t_to [, points]])`:
/// cost per unit usage of age replacement (planned, unplanned, total) and of
/// block replacement at each candidate interval.
pub static COST_CURVE: TableSpec = TableSpec {
    name: "life_cost_curve",
    columns: &[
        "age",
        "planned_rate",
        "unplanned_rate",
        "total_rate",
        "block_rate",
        "is_optimum",
    ],
    args: &["model", "cost_planned", "cost_failure", "t_to", "points"],
    required: 3,
    produce: |a| {
        use crate::decide::{check_costs, optimal_replacement_age, policy, renewal};
        let m = model_of(a[0])?;
        let cp = number_of(a[1], "cost_planned", f64::NAN)?;
        let cf = number_of(a[2], "cost_failure", f64::NAN)?;
        check_costs(cp, cf)?;
        let d = m.dist.as_ref();
        let optimum = optimal_replacement_age(d, cp, cf)?;
        let default_end = match optimum {
            Some(t) => (3.0 * t).max(d.quantile(0.9)),
            None => d.quantile(0.99),
        };
        let to = number_of(a[3], "t_to", default_end)?;
        let points = number_of(a[4], "points", 50.0)?;
        if !(to.is_finite() && to > 0.0) {
            return Err(LifeError::bad(
                "t_to",
                "must be a finite number > 0",
                show_number(to),
            ));
        }
        if !(points.fract() == 0.0 && (2.0..=10_000.0).contains(&points)) {
            return Err(LifeError::bad(
                "points",
                "must be a whole number from 2 to 10000",
                show_number(points),
            ));
        }
        let n = points as usize;
        let mut ages: Vec<f64> = (1..=n).map(|i| to * i as f64 / n as f64).collect();
        if let Some(t) = optimum.filter(|t| *t <= to) {
            ages.push(t);
            ages.sort_by(f64::total_cmp);
        }
        let curve = policy::age_replacement_curve(d, cp, cf, &ages)?;
        let renewals = renewal::renewal_curve(d, &ages).ok();
        Ok(curve
            .iter()
            .enumerate()
            .map(|(i, c)| {
                let block = renewals
                    .as_ref()
                    .map_or(Value::Null, |r| real((cp + cf * r[i]) / c.age));
                vec![
                    Value::Real(c.age),
                    real(c.planned_rate),
                    real(c.unplanned_rate),
                    real(c.total_rate),
                    block,
                    Value::Integer(i64::from(optimum == Some(c.age))),
                ]
            })
            .collect())
    },
};

/// Registers every table function on `conn`.
pub fn register_tables(conn: &Connection) -> Result<()> {
    for spec in [&CURVE, &PLOT_POINTS, &COST_CURVE] {
        register_table(conn, spec)?;
    }
    Ok(())
}
