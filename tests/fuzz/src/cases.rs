//! The fuzz targets' bodies, one module each, callable on any bytes: the
//! cargo-fuzz targets call them under libFuzzer, and the repository's
//! `tests/fuzz_corpus.rs` replays the committed corpora through them on
//! every `cargo test`.

pub mod model_parse {
    //! Model::parse on arbitrary text: never a panic; a model that parses
    //! writes JSON that parses again to the same model, bit for bit, and its
    //! readers stay in range (NaN, which SQL returns as NULL, allowed).

    use lifedata::Model;

    /// One fuzz case.
    pub fn run_case(data: &[u8]) {
        let Ok(text) = std::str::from_utf8(data) else {
            return;
        };
        let Ok(m) = Model::parse(text) else {
            return;
        };
        let json = m.to_json();
        let again = Model::parse(&json)
            .unwrap_or_else(|e| panic!("{text}\nwrites {json}\nwhich does not read back: {e}"));
        assert_eq!(again.to_json(), json, "{text}: the written model changed");
        let bits = |p: Vec<f64>| p.into_iter().map(f64::to_bits).collect::<Vec<_>>();
        assert_eq!(bits(again.dist.params()), bits(m.dist.params()), "{text}");
        assert_eq!(
            again.fit.is_some(),
            m.fit.is_some(),
            "{text}: the fit summary was lost"
        );
        let d = m.dist.as_ref();
        // (A normal or a weibull3 with a negative location puts mass below age
        // 0, so its quantiles may be negative: no sign check.)
        for p in [0.0, 1e-300, 0.1, 0.5, 0.9, 0.999_999_999_999_999_9] {
            let _ = d.quantile(p);
        }
        for t in [0.0, 5e-324, 1e-300, 1.0, 1e3, 1e300, f64::MAX] {
            let (f, r) = (d.cdf(t), d.sf(t));
            assert!(
                f.is_nan() || (0.0..=1.0).contains(&f),
                "{text}: cdf({t}) = {f}"
            );
            assert!(
                r.is_nan() || (0.0..=1.0).contains(&r),
                "{text}: sf({t}) = {r}"
            );
            let c = d.cond_fail(t, 10.0);
            assert!(
                c.is_nan() || (0.0..=1.0).contains(&c),
                "{text}: cond_fail({t}, 10) = {c}"
            );
            let _ = (d.pdf(t), d.hazard(t), d.sf_integral(t));
        }
        let _ = d.mean();
    }
}

pub mod sql_readers {
    //! Every scalar and table-valued lifedata function with arbitrary
    //! arguments (valid argument counts, any values, hand-written, fitted and
    //! mutated models) on a bundled in-memory SQLite: a value or an SQL error
    //! named after the function, never a panic.

    use super::super::{connection, fitted_models, huge_counts, run, Gen};
    use rusqlite::types::Value as Sql;
    use rusqlite::Connection;

    /// (name, fewest arguments, most arguments, table-valued, takes a model first)
    const FUNCS: &[(&str, usize, usize, bool, bool)] = &[
        ("life_quantile", 2, 2, false, true),
        ("life_cdf", 2, 2, false, true),
        ("life_reliability", 2, 2, false, true),
        ("life_pdf", 2, 2, false, true),
        ("life_hazard", 2, 2, false, true),
        ("life_mean", 1, 1, false, true),
        ("life_cond_fail", 3, 3, false, true),
        ("life_replace_age", 3, 3, false, true),
        ("life_param_lower", 2, 5, false, true),
        ("life_param_upper", 2, 5, false, true),
        ("life_quantile_lower", 2, 5, false, true),
        ("life_quantile_upper", 2, 5, false, true),
        ("life_reliability_lower", 2, 5, false, true),
        ("life_reliability_upper", 2, 5, false, true),
        ("life_replacement", 3, 5, false, true),
        ("life_availability_age", 3, 3, false, true),
        ("life_renewal", 2, 2, false, true),
        ("life_block_replacement", 4, 4, false, true),
        ("life_plot_svg", 1, 4, false, true),
        ("life_cost_svg", 3, 5, false, true),
        ("life_usage", 2, 3, false, false),
        ("life_curve", 0, 6, true, true),
        ("life_plot_points", 0, 3, true, true),
        ("life_cost_curve", 0, 5, true, true),
    ];

    thread_local! {
        static STATE: (Connection, Vec<String>) = {
            let c = connection();
            let fitted = fitted_models(&c);
            (c, fitted)
        };
    }

    /// One fuzz case.
    pub fn run_case(data: &[u8]) {
        STATE.with(|(c, fitted)| {
            let mut g = Gen::new(data);
            for _ in 0..3 {
                let (name, lo, hi, table, model_first) = g.pick(FUNCS);
                let n = lo + g.below(hi - lo + 1);
                let mut args: Vec<Sql> = Vec::with_capacity(n);
                for i in 0..n {
                    args.push(if i == 0 && model_first {
                        g.model(fitted)
                    } else {
                        g.sql_value()
                    });
                }
                if matches!(name, "life_plot_points" | "life_plot_svg")
                    && args.first().is_some_and(huge_counts)
                {
                    continue;
                }
                let marks: Vec<String> = (1..=n).map(|i| format!("?{i}")).collect();
                let sql = if table {
                    format!("SELECT * FROM {name}({})", marks.join(", "))
                } else {
                    format!("SELECT {name}({})", marks.join(", "))
                };
                run(c, name, &sql, &args, 2000);
                if !g.more() {
                    break;
                }
            }
        })
    }
}

pub mod fit {
    //! Fitting (the Rust API) on arbitrary ages, censoring, entry ages, counts
    //! and options: never a panic; a fit gives the same model whatever the row
    //! order, and the model it writes reads back.

    use super::super::Gen;
    use lifedata::fit::{fit, FitOptions};
    use lifedata::sample::{Obs, Sample};
    use lifedata::Model;
    use rusqlite::types::Value as Sql;

    const GRID: &[f64] = &[1.0, 2.0, 3.0, 5.0, 8.0, 13.0, 21.0, 34.0, 55.0, 89.0, 144.0];

    fn age(g: &mut Gen, last: f64) -> f64 {
        match g.byte() % 4 {
            0 => g.number().abs(),
            1 | 2 => g.pick(GRID) * g.pick(&[1e-300, 1e-3, 1.0, 1.0, 1e3, 1e300]),
            _ => last,
        }
    }

    /// One fuzz case.
    pub fn run_case(data: &[u8]) {
        let mut g = Gen::new(data);
        let text = match g.fit_options() {
            Sql::Text(t) => t,
            _ => "{}".to_string(),
        };
        let Ok(opts) = FitOptions::parse(&text) else {
            return;
        };
        let rows = 1 + g.below(48);
        let mut obs: Vec<Obs> = Vec::with_capacity(rows);
        let mut last = 10.0;
        for _ in 0..rows {
            let a = age(&mut g, last);
            last = a;
            let (earliest, latest) = match g.byte() % 8 {
                0..=2 => (a, Some(a)),
                3..=5 => (a, None),
                6 => (0.0, Some(a)),
                _ => (a, Some(age(&mut g, a))),
            };
            let entry = if g.byte() % 6 == 0 {
                earliest * g.fraction()
            } else {
                0.0
            };
            // The SQL layer accepts counts up to 1e15 per row.
            let count = match g.byte() % 8 {
                0 => 1_000_000_000_000_000,
                1 => 1 + g.below(1000) as u64,
                _ => 1,
            };
            if let Ok(o) = Sample::observation(earliest, latest, entry, count) {
                obs.push(o);
            }
        }
        if obs.is_empty() {
            return;
        }
        let mut forward = Sample::new();
        let pushed = obs.iter().try_for_each(|o| forward.push(*o));
        let mut backward = Sample::new();
        let pushed_back = obs.iter().rev().try_for_each(|o| backward.push(*o));
        // Too many units in all: both orders refuse alike, nothing to fit.
        assert_eq!(pushed.is_ok(), pushed_back.is_ok());
        if pushed.is_err() {
            return;
        }
        let show = std::env::var_os("LIFEDATA_FUZZ_SHOW").is_some();
        if show {
            eprintln!("options {text} rows {obs:?}");
        }
        let started = std::time::Instant::now();
        let a = fit(&forward, &opts, 0);
        if show {
            eprintln!(
                "  -> {:?} in {:.3} s",
                a.as_ref().map(|m| m.to_json()),
                started.elapsed().as_secs_f64()
            );
        }
        let b = fit(&backward, &opts, 0);
        match (&a, &b) {
            (Ok(a), Ok(b)) => assert_eq!(a.to_json(), b.to_json(), "{text} {obs:?}"),
            (Err(a), Err(b)) => assert_eq!(a.to_string(), b.to_string(), "{text} {obs:?}"),
            _ => panic!("{text} {obs:?}: row order changed the outcome: {a:?} / {b:?}"),
        }
        let Ok(m) = a else {
            return;
        };
        for p in m.dist.params() {
            assert!(p.is_finite(), "{text} {obs:?}: parameter {p}");
        }
        let json = m.to_json();
        let again = Model::parse(&json)
            .unwrap_or_else(|e| panic!("{text} {obs:?}: {json} does not read back: {e}"));
        let d = again.dist.as_ref();
        for p in [0.01, 0.1, 0.5] {
            let _ = d.quantile(p);
        }
    }
}

pub mod sql_aggregates {
    //! Every lifedata aggregate (grouped, whole-table and as a window function
    //! sliding over the rows) on arbitrary rows and options through a bundled
    //! in-memory SQLite, and the bounds, plots and curves read from the models
    //! the fits return: a value or an SQL error named after the function, never
    //! a panic.

    use super::super::{connection, fitted_models, huge_counts, run, run_noted, Gen};
    use rusqlite::types::Value as Sql;
    use rusqlite::Connection;

    /// (function, its arguments as columns of table r, window-capable)
    const AGGS: &[(&str, &str)] = &[
        ("life_fit", "age, failed"),
        ("life_fit", "age, failed, opt"),
        ("life_fit_interval", "earliest, latest"),
        ("life_fit_interval", "earliest, latest, entry, cnt, opt"),
        ("life_fit_all", "age, failed, opt"),
        ("life_fit_all_interval", "earliest, latest, entry, cnt, opt"),
        ("life_km", "age, failed, opt"),
        ("life_km_interval", "earliest, latest, entry, cnt, opt"),
        ("life_compare", "grp, age, failed, opt"),
        (
            "life_compare_interval",
            "grp, earliest, latest, entry, cnt, opt",
        ),
        ("life_forecast", "?1, age, horizon"),
        ("life_forecast", "?1, age, horizon, opt"),
    ];

    thread_local! {
        static STATE: (Connection, Vec<String>) = {
            let c = connection();
            c.execute_batch(
                "CREATE TABLE r(grp, age, failed, earliest, latest, entry, cnt, horizon, opt)",
            )
            .expect("create table");
            let fitted = fitted_models(&c);
            (c, fitted)
        };
    }

    const GRID: &[f64] = &[1.0, 2.0, 3.0, 5.0, 8.0, 13.0, 21.0, 34.0, 55.0, 89.0, 144.0];

    fn age(g: &mut Gen) -> Sql {
        match g.byte() % 8 {
            0 => g.sql_value(),
            1 => Sql::Real(g.number().abs()),
            2 => Sql::Null,
            _ => Sql::Real(g.pick(GRID) * g.pick(&[1e-300, 1e-3, 1.0, 1.0, 1e3, 1e300])),
        }
    }

    fn flag(g: &mut Gen) -> Sql {
        match g.byte() % 16 {
            0 => g.sql_value(),
            1..=8 => Sql::Integer(1),
            _ => Sql::Integer(0),
        }
    }

    /// One fuzz case.
    pub fn run_case(data: &[u8]) {
        STATE.with(|(c, fitted)| {
            let mut g = Gen::new(data);
            c.execute("DELETE FROM r", []).expect("clear");
            let mut table: Vec<Vec<Sql>> = Vec::new();
            let opt = g.fit_options();
            let rows = g.below(40);
            for _ in 0..rows {
                let row_opt = if g.byte() % 32 == 0 {
                    g.fit_options()
                } else {
                    opt.clone()
                };
                let vals = [
                    Sql::Text(g.pick(&["A", "B", "C"]).to_string()),
                    age(&mut g),
                    flag(&mut g),
                    age(&mut g),
                    if g.byte() % 3 == 0 {
                        Sql::Null
                    } else {
                        age(&mut g)
                    },
                    if g.byte() % 5 == 0 {
                        age(&mut g)
                    } else {
                        Sql::Integer(0)
                    },
                    match g.byte() % 6 {
                        0 => g.sql_value(),
                        1 => Sql::Integer(1 + g.below(100) as i64),
                        _ => Sql::Integer(1),
                    },
                    age(&mut g),
                    row_opt,
                ];
                c.execute(
                    "INSERT INTO r VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
                    rusqlite::params_from_iter(vals.iter()),
                )
                .expect("insert");
                table.push(vals.to_vec());
            }
            let (name, cols) = g.pick(AGGS);
            let model = g.model(fitted);
            let sql = match g.byte() % 4 {
                0 => format!("SELECT {name}({cols}) FROM r"),
                1 => format!("SELECT grp, {name}({cols}) FROM r GROUP BY grp"),
                _ => {
                    let before = g.below(4);
                    let after = g.below(3);
                    format!(
                        "SELECT {name}({cols}) OVER (ORDER BY rowid ROWS BETWEEN {before} PRECEDING \
                         AND {after} FOLLOWING) FROM r"
                    )
                }
            };
            let args: Vec<Sql> = if cols.starts_with("?1") {
                vec![model]
            } else {
                vec![]
            };
            let note = format!("rows {table:?}");
            let out = run_noted(c, name, &sql, &args, 1000, &note);
            if !name.starts_with("life_fit") || name.starts_with("life_fit_all") {
                return;
            }
            // Read the fitted models back with the readers that use their data.
            let p = Sql::Real(g.fraction());
            for m in out
                .iter()
                .filter_map(|r| match r.last() {
                    Some(Sql::Text(t)) => Some(t.clone()),
                    _ => None,
                })
                .take(3)
            {
                let m = Sql::Text(m);
                let plots = !huge_counts(&m);
                for (f, sql) in [
                    (
                        "life_quantile_lower",
                        "SELECT life_quantile_lower(?1, ?2, 0.9, 2, 'lr')",
                    ),
                    (
                        "life_quantile_upper",
                        "SELECT life_quantile_upper(?1, ?2, 0.95, 1, 'lr')",
                    ),
                    (
                        "life_reliability_lower",
                        "SELECT life_reliability_lower(?1, ?2, 0.9, 2, 'lr')",
                    ),
                    (
                        "life_param_upper",
                        "SELECT life_param_upper(?1, 'scale', ?2, 2, 'lr')",
                    ),
                    ("life_quantile_lower", "SELECT life_quantile_lower(?1, ?2)"),
                    ("life_plot_points", "SELECT * FROM life_plot_points(?1, ?2)"),
                    ("life_plot_svg", "SELECT life_plot_svg(?1, 't', 'h', ?2)"),
                ] {
                    if g.byte() % 2 == 0 && (plots || !f.starts_with("life_plot")) {
                        run(c, f, sql, &[m.clone(), p.clone()], 1000);
                    }
                }
            }
        })
    }
}
