//! Every scalar and table-valued lifedata function with arbitrary
//! arguments (valid argument counts, any values, hand-written, fitted and
//! mutated models) on a bundled in-memory SQLite: a value or an SQL error
//! named after the function, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| lifedata_fuzz::cases::sql_readers::run_case(data));
