//! Every lifedata aggregate (grouped, whole-table and as a window function
//! sliding over the rows) on arbitrary rows and options through a bundled
//! in-memory SQLite, and the bounds, plots and curves read from the models
//! the fits return: a value or an SQL error named after the function, never
//! a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;
use lifedata_fuzz::{connection, fitted_models, huge_counts, run, run_noted, Gen};
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

fuzz_target!(|data: &[u8]| {
    STATE.with(|(c, fitted)| {
        let mut g = Gen::new(data);
        c.execute("DELETE FROM r", []).expect("clear");
        let mut table: Vec<Vec<Sql>> = Vec::new();
        let opt = g.fit_options();
        let rows = g.below(40);
        for _ in 0..rows {
            let row_opt = if g.byte().is_multiple_of(32) {
                g.fit_options()
            } else {
                opt.clone()
            };
            let vals = [
                Sql::Text(g.pick(&["A", "B", "C"]).to_string()),
                age(&mut g),
                flag(&mut g),
                age(&mut g),
                if g.byte().is_multiple_of(3) {
                    Sql::Null
                } else {
                    age(&mut g)
                },
                if g.byte().is_multiple_of(5) {
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
                if g.byte().is_multiple_of(2) && (plots || !f.starts_with("life_plot")) {
                    run(c, f, sql, &[m.clone(), p.clone()], 1000);
                }
            }
        }
    })
});
