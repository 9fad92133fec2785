//! Fuzz target: see `rung_fuzz::sites_toml` for what it feeds and checks.
#![no_main]
libfuzzer_sys::fuzz_target!(|data: &[u8]| rung_fuzz::sites_toml(data));
