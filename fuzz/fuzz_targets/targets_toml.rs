//! Fuzz target: see `rung_fuzz::targets_toml` for what it feeds and checks.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| rung_fuzz::targets_toml(data));
