//! Every scalar and table-valued lifedata function with arbitrary
//! arguments (valid argument counts, any values, hand-written, fitted and
//! mutated models) on a bundled in-memory SQLite: a value or an SQL error
//! named after the function, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;
use lifedata_fuzz::{connection, fitted_models, huge_counts, run, Gen};
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

fuzz_target!(|data: &[u8]| {
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
});
