//! Fitting (the Rust API) on arbitrary ages, censoring, entry ages, counts
//! and options: never a panic; a fit gives the same model whatever the row
//! order, and the model it writes reads back.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| lifedata_fuzz::cases::fit::run_case(data));
