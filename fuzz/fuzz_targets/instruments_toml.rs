//! Fuzz target: see `rung_fuzz::instruments_toml` for what it feeds and checks.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| rung_fuzz::instruments_toml(data));
