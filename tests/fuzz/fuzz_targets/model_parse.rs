//! Model::parse on arbitrary text: never a panic; a model that parses
//! writes JSON that parses again to the same model, bit for bit, and its
//! readers stay in range (NaN, which SQL returns as NULL, allowed).
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| lifedata_fuzz::cases::model_parse::run_case(data));
