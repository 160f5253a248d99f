//! Every lifedata aggregate (grouped, whole-table and as a window function
//! sliding over the rows) on arbitrary rows and options through a bundled
//! in-memory SQLite, and the bounds, plots and curves read from the models
//! the fits return: a value or an SQL error named after the function, never
//! a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| lifedata_fuzz::cases::sql_aggregates::run_case(data));
