//! Fuzz target: see `rung_fuzz::cli_options` for what it feeds and checks.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| rung_fuzz::cli_options(data));
