//! Input generation and checks shared by the fuzz targets.
//!
//! The fuzzer's bytes are read through [`Gen`], which turns them into SQL
//! values, numbers, model texts and option texts. About half of the time a
//! number comes from a pool of values where numerical code breaks (zero,
//! signed zero, subnormals, the largest double, infinities, NaN, integer
//! extremes, probabilities next to 1), the rest from the raw bytes, so the
//! fuzzer reaches both the edges and everything in between.
//!
//! The oracle is the project's promise: every call returns a value or an
//! SQL error whose message starts with the function's name and never
//! mentions a panic. A panic anywhere (even one that rusqlite would catch
//! and turn into an error) aborts the fuzz target through libfuzzer-sys'
//! panic hook, and so does a failed check here.

pub mod cases;

use rusqlite::types::Value as Sql;
use rusqlite::{Connection, Error};
use serde_json::{json, Map, Value};

/// The fuzzer's bytes, read on demand; an exhausted input gives zeros.
pub struct Gen<'a> {
    bytes: &'a [u8],
}

/// Numbers where numerical code tends to break.
pub const EDGES: &[f64] = &[
    0.0,
    -0.0,
    1.0,
    -1.0,
    0.5,
    0.1,
    0.9,
    0.95,
    0.999_999_999_999_999_9,
    1e-300,
    5e-324,
    2.2250738585072014e-308,
    1e-10,
    1e300,
    1e308,
    f64::MAX,
    -f64::MAX,
    f64::INFINITY,
    f64::NEG_INFINITY,
    f64::NAN,
    2.0,
    3.0,
    10.0,
    100.0,
    1000.0,
    1e6,
    1e15,
    1e16,
    9.007_199_254_740_992e15,
    5373484.5,
    5373485.0,
    2460370.5,
    1.7e9,
];

/// Words the functions accept somewhere (parameter names, methods, units,
/// spacings, dates) and a few they do not.
pub const WORDS: &[&str] = &[
    "shape",
    "scale",
    "location",
    "mu",
    "sigma",
    "fisher",
    "lr",
    "chi2",
    "linear",
    "log",
    "bernard",
    "exact",
    "seconds",
    "minutes",
    "hours",
    "days",
    "2024-03-01",
    "2024-03-01 14:30",
    "2024-03-01T14:30:00.250+02:00",
    "2023-02-30",
    "0000-01-01",
    "9999-12-31 23:59:59.999Z",
    "",
    "\u{0}",
    "<&'\">",
    "weibull",
    "{}",
    "mle",
];

/// Every family name, and one that does not exist.
pub const DISTS: &[&str] = &[
    "weibull",
    "weibull3",
    "exponential",
    "lognormal",
    "normal",
    "loglogistic",
    "gamma",
    "gumbel",
];

impl<'a> Gen<'a> {
    /// Reads from `bytes`.
    pub fn new(bytes: &'a [u8]) -> Self {
        Gen { bytes }
    }

    /// True while input bytes remain.
    pub fn more(&self) -> bool {
        !self.bytes.is_empty()
    }

    /// One byte (0 once the input is used up).
    pub fn byte(&mut self) -> u8 {
        match self.bytes.split_first() {
            Some((&b, rest)) => {
                self.bytes = rest;
                b
            }
            None => 0,
        }
    }

    fn bytes8(&mut self) -> [u8; 8] {
        let mut out = [0u8; 8];
        for b in &mut out {
            *b = self.byte();
        }
        out
    }

    /// A number below `n` (n > 0).
    pub fn below(&mut self, n: usize) -> usize {
        let v = u16::from_le_bytes([self.byte(), self.byte()]) as usize;
        v % n
    }

    /// One of `items`.
    pub fn pick<T: Copy>(&mut self, items: &[T]) -> T {
        items[self.below(items.len())]
    }

    /// A double: an edge value, a small decimal, or raw bits.
    pub fn number(&mut self) -> f64 {
        match self.byte() % 4 {
            0 | 1 => self.pick(EDGES),
            2 => {
                // A decimal of modest size with a random exponent.
                let m = u16::from_le_bytes([self.byte(), self.byte()]) as f64;
                let e = (self.byte() % 41) as i32 - 20;
                m * 10f64.powi(e)
            }
            _ => f64::from_le_bytes(self.bytes8()),
        }
    }

    /// A number in [0, 1], edges included.
    pub fn fraction(&mut self) -> f64 {
        match self.byte() % 4 {
            0 => self.pick(&[0.0, 1.0, 5e-324, 1e-300, 0.5, 0.999_999_999_999_999_9]),
            _ => {
                u32::from_le_bytes([self.byte(), self.byte(), self.byte(), self.byte()]) as f64
                    / u32::MAX as f64
            }
        }
    }

    /// Text: a known word, or bytes from the input (lossy UTF-8).
    pub fn text(&mut self) -> String {
        if self.byte() % 2 == 0 {
            self.pick(WORDS).to_string()
        } else {
            let n = self.below(48);
            let raw: Vec<u8> = (0..n).map(|_| self.byte()).collect();
            String::from_utf8_lossy(&raw).into_owned()
        }
    }

    /// Any SQL value, numbers most often.
    pub fn sql_value(&mut self) -> Sql {
        match self.byte() % 10 {
            0 => Sql::Null,
            1 => Sql::Integer(self.pick(&[0, 1, -1, 2, 5, 100, i64::MAX, i64::MIN, 1 << 53])),
            2 => Sql::Integer(i64::from_le_bytes(self.bytes8())),
            3 => Sql::Text(self.text()),
            4 => {
                let n = self.below(16);
                Sql::Blob((0..n).map(|_| self.byte()).collect())
            }
            5 => Sql::Real(self.fraction()),
            _ => Sql::Real(self.number()),
        }
    }

    /// A JSON value of any type, numbers most often.
    pub fn json_value(&mut self) -> Value {
        match self.byte() % 8 {
            0 => Value::Null,
            1 => json!((self.byte() % 2 == 0)),
            2 => json!(self.text()),
            3 => json!([self.number(), Value::Null, self.number(), 1]),
            4 => json!(i64::from_le_bytes(self.bytes8())),
            5 => json!({ "matrix": [[self.number()]] }),
            // serde_json writes non-finite numbers as null.
            _ => json!(self.number()),
        }
    }

    /// Model text: hand-written for a family, a fitted model (mutated or
    /// not), or raw bytes.
    pub fn model(&mut self, fitted: &[String]) -> Sql {
        match self.byte() % 8 {
            0 => Sql::Null,
            1 => Sql::Text(self.text()),
            2 | 3 => {
                let dist = self.pick(DISTS);
                let mut m = Map::new();
                m.insert("dist".into(), json!(dist));
                for p in ["shape", "scale", "location", "mu", "sigma"] {
                    if self.byte() % 4 != 0 {
                        m.insert(p.into(), json!(self.number()));
                    }
                }
                Sql::Text(Value::Object(m).to_string())
            }
            _ => {
                let text = &fitted[self.below(fitted.len())];
                if self.byte() % 2 == 0 {
                    return Sql::Text(text.clone());
                }
                let mut v: Value = serde_json::from_str(text).expect("fitted model is JSON");
                let obj = v.as_object_mut().expect("fitted model is an object");
                for _ in 0..=self.byte() % 3 {
                    let keys: Vec<String> = obj.keys().cloned().collect();
                    let key = keys[self.below(keys.len())].clone();
                    match self.byte() % 4 {
                        0 => {
                            obj.remove(&key);
                        }
                        1 => {
                            // Mutate one number inside the value (cov entries, sample rows).
                            let x = self.number();
                            let at = self.below(64);
                            mutate_number(obj.get_mut(&key).expect("key"), x, at);
                        }
                        _ => {
                            let val = self.json_value();
                            obj.insert(key, val);
                        }
                    }
                }
                Sql::Text(v.to_string())
            }
        }
    }

    /// Options text for the fits: a JSON object with known keys and any
    /// values, occasionally raw text or a non-text value.
    pub fn fit_options(&mut self) -> Sql {
        match self.byte() % 8 {
            0 => Sql::Null,
            1 => self.sql_value(),
            _ => {
                let mut m = Map::new();
                for _ in 0..self.below(4) {
                    let key = self.pick(&[
                        "dist",
                        "method",
                        "ranks",
                        "keep_sample",
                        "shape",
                        "scale",
                        "location",
                        "mu",
                        "sigma",
                        "conf",
                        "band",
                        "renewal",
                        "quantiles",
                    ]);
                    let val = match key {
                        "dist" => json!(self.pick(DISTS)),
                        "method" => json!(self.pick(&["mle", "rank_y", "rank_x", "moments"])),
                        "ranks" => json!(self.pick(&["bernard", "exact", "mean"])),
                        "band" => json!(self.pick(&["loglog", "linear", "wide"])),
                        "keep_sample" | "renewal" => json!(self.byte() % 3 != 0),
                        "quantiles" => json!([self.fraction(), self.fraction()]),
                        "conf" => json!(self.fraction()),
                        _ if (self.byte() % 4 == 0) => self.json_value(),
                        _ => json!(self.number()),
                    };
                    m.insert(key.into(), val);
                }
                Sql::Text(Value::Object(m).to_string())
            }
        }
    }
}

/// Replaces the `at`-th number (depth first, wrapping) inside `v` by `x`.
fn mutate_number(v: &mut Value, x: f64, at: usize) {
    let mut count = 0usize;
    count_numbers(v, &mut count);
    if count == 0 {
        *v = json!(x);
        return;
    }
    let mut k = at % count;
    set_nth(v, &mut k, x);
}

fn count_numbers(v: &Value, n: &mut usize) {
    match v {
        Value::Number(_) => *n += 1,
        Value::Array(a) => a.iter().for_each(|e| count_numbers(e, n)),
        Value::Object(o) => o.values().for_each(|e| count_numbers(e, n)),
        _ => {}
    }
}

fn set_nth(v: &mut Value, k: &mut usize, x: f64) -> bool {
    match v {
        Value::Number(_) => {
            if *k == 0 {
                *v = json!(x);
                return true;
            }
            *k -= 1;
            false
        }
        Value::Array(a) => a.iter_mut().any(|e| set_nth(e, k, x)),
        Value::Object(o) => o.values_mut().any(|e| set_nth(e, k, x)),
        _ => false,
    }
}

/// True when a model's kept sample stands for more than 100 000 failed
/// units. The probability plot (`life_plot_points`, `life_plot_svg`) gives
/// one point per failed unit, up to its cap of 10 million: in a release
/// build 10 million take 28 s (Bernard) to 5 minutes ('exact' ranks) and
/// 4.4 GB. The targets skip those two calls on such models so that a run
/// spends its time on other inputs.
pub fn huge_counts(model: &Sql) -> bool {
    let Sql::Text(t) = model else {
        return false;
    };
    let Ok(v) = serde_json::from_str::<Value>(t) else {
        return false;
    };
    v.get("sample")
        .and_then(Value::as_array)
        .is_some_and(|rows| {
            rows.iter()
                .filter(|r| r.get(1).is_some_and(|l| !l.is_null()))
                .filter_map(|r| r.get(3).and_then(Value::as_f64))
                .sum::<f64>()
                > 1e5
        })
}

/// An in-memory bundled SQLite with every lifedata function.
pub fn connection() -> Connection {
    let c = Connection::open_in_memory().expect("open in-memory database");
    lifedata::register(&c).expect("register lifedata");
    c
}

/// Fitted models (with covariance, kept sample, known shape, rank fits) of
/// every family, as seeds for mutation.
pub fn fitted_models(c: &Connection) -> Vec<String> {
    let data = "(17.88,1),(28.92,1),(33.0,0),(41.52,1),(42.12,1),(45.6,0),(48.48,1),\
                (51.84,1),(51.96,0),(54.12,1),(68.64,1),(68.64,1),(84.12,0),(105.12,1),(173.4,1)";
    let mut out = Vec::new();
    let mut opts: Vec<String> = DISTS[..7]
        .iter()
        .map(|d| format!(r#"{{"dist":"{d}","keep_sample":true}}"#))
        .collect();
    opts.push(r#"{"shape":2,"keep_sample":true}"#.into());
    opts.push(r#"{"method":"rank_y","keep_sample":true}"#.into());
    opts.push(r#"{"method":"rank_x","dist":"lognormal","ranks":"exact"}"#.into());
    for o in opts {
        let sql = format!("SELECT life_fit(column1, column2, '{o}') FROM (VALUES {data})");
        let m: String = c
            .query_row(&sql, [], |r| r.get(0))
            .unwrap_or_else(|e| panic!("{sql}: {e}"));
        out.push(m);
    }
    let zero: String = c
        .query_row(
            "SELECT life_fit(column1, 0, '{\"shape\":1.5,\"keep_sample\":true}') \
             FROM (VALUES (100),(250),(400))",
            [],
            |r| r.get(0),
        )
        .expect("zero-failure fit");
    out.push(zero);
    out
}

/// The project's promise for one call: Ok, or an SQL error that starts
/// with the function's name and does not mention a panic.
pub fn check<T: std::fmt::Debug>(func: &str, sql: &str, r: &rusqlite::Result<T>) {
    match r {
        Ok(_) => {}
        Err(Error::SqliteFailure(_, Some(msg))) => {
            assert!(
                msg.starts_with(&format!("{func}: ")),
                "{sql}: error not named after {func}: {msg}"
            );
            assert!(!msg.contains("panic"), "{sql}: {msg}");
        }
        Err(e) => panic!("{sql}: unexpected error {e:?}"),
    }
}

/// Runs `sql` with `args` bound and reads every row (at most `limit`),
/// checking the promise; returns the rows read.
pub fn run(c: &Connection, func: &str, sql: &str, args: &[Sql], limit: usize) -> Vec<Vec<Sql>> {
    run_noted(c, func, sql, args, limit, "")
}

/// [`run`], with a note (e.g. the table's rows) for the failure message.
pub fn run_noted(
    c: &Connection,
    func: &str,
    sql: &str,
    args: &[Sql],
    limit: usize,
    note: &str,
) -> Vec<Vec<Sql>> {
    if std::env::var_os("LIFEDATA_FUZZ_SHOW").is_some() {
        eprintln!("{sql} with {args:?} {note}");
    }
    let started = std::time::Instant::now();
    let mut stmt = c
        .prepare(sql)
        .unwrap_or_else(|e| panic!("{sql}: prepare: {e}"));
    let n = stmt.column_count();
    let r: rusqlite::Result<Vec<Vec<Sql>>> = (|| {
        let mut rows = stmt.query(rusqlite::params_from_iter(args.iter()))?;
        let mut out = Vec::new();
        while let Some(row) = rows.next()? {
            let mut vals = Vec::with_capacity(n);
            for i in 0..n {
                vals.push(row.get::<_, Sql>(i)?);
            }
            out.push(vals);
            if out.len() >= limit {
                break;
            }
        }
        Ok(out)
    })();
    check(func, &format!("{sql} with {args:?} {note}"), &r);
    if std::env::var_os("LIFEDATA_FUZZ_SHOW").is_some() {
        eprintln!("  -> {r:?} in {:.3} s", started.elapsed().as_secs_f64());
    }
    r.unwrap_or_default()
}
