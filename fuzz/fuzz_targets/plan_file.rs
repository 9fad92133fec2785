//! Fuzz target: see `rung_fuzz::plan_file` for what it feeds and checks.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| rung_fuzz::plan_file(data));
