//! What the `rung plan` command-line tests share (plan_log, plan_snr): one
//! run of the binary in a folder at a given clock, and a saved plan of the
//! demo programme.
//!
//! Each test file includes it with `mod plan_cli;`.

use rung::plan::file::{self, PlanFile};
use std::path::Path;
use std::process::Command;

/// The demo programme's targets file.
pub const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo/targets.csv");

/// `rung ARGS` in `dir` (its config folder too) with the clock at `now`:
/// (succeeded, stdout, stderr).
pub fn run<S: AsRef<std::ffi::OsStr>>(dir: &Path, now: &str, args: &[S]) -> (bool, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(dir)
        .env("RUNG_CONFIG_DIR", dir)
        .env("RUNG_NOW", now)
        .output()
        .unwrap();
    (
        o.status.success(),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// A plan of the demo programme from 2026-12-01 to `to` at 6 h a night,
/// its methods planning to `horizon_to`, saved as `dir/p.json` (its log
/// started), made with the clock at `now`.
pub fn make_plan(dir: &Path, now: &str, to: &str, horizon_to: &str) -> PlanFile {
    let args = [
        "plan",
        "--targets",
        DEMO,
        "--from",
        "2026-12-01",
        "--to",
        to,
        "--horizon-to",
        horizon_to,
        "--hours-per-night",
        "6",
        "--save",
        "p.json",
    ];
    let (ok, _, err) = run(dir, now, &args);
    assert!(ok, "{args:?}: {err}");
    file::load(&dir.join("p.json")).unwrap()
}
