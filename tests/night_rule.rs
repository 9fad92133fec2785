//! Which night is tonight: the same rule in the library, the terminal UI and
//! the command line, with the clock injected (never the wall clock).
//!
//! The rule (README, "Programme settings"): after local noon, the coming
//! night; in the dark hours after midnight, the night in progress; in the
//! morning after sunrise, the coming night. Sunrise times quoted are for early
//! December at the demo sites' latitudes (a fact of the trade: about 06:20 at
//! −27° in the southern summer, about 08:20 at +38° in Spain's winter), far
//! from the test times, so the checks do not hang on the exact minute.

mod tui_support;

use rung::astro::time::{Instant, parse_instant};
use rung::io::sites;
use rung::programme::tonight;
use std::process::Command;

/// (site, UTC instant, local time it is there, the night an observer means).
const CASES: [(&str, &str, &str, &str); 12] = [
    // Pampa Lucero, UTC−3 all year.
    (
        "pampa-lucero",
        "2026-12-02T14:00:00Z",
        "11:00",
        "2026-12-02",
    ),
    (
        "pampa-lucero",
        "2026-12-02T22:00:00Z",
        "19:00",
        "2026-12-02",
    ),
    (
        "pampa-lucero",
        "2026-12-03T02:30:00Z",
        "23:30",
        "2026-12-02",
    ),
    (
        "pampa-lucero",
        "2026-12-03T06:00:00Z",
        "03:00",
        "2026-12-02",
    ),
    // 07:30 after sunrise: the coming night.
    (
        "pampa-lucero",
        "2026-12-03T10:30:00Z",
        "07:30",
        "2026-12-03",
    ),
    // Sierra Alcaraván, UTC+1 in winter.
    (
        "sierra-alcaravan",
        "2026-12-02T10:00:00Z",
        "11:00",
        "2026-12-02",
    ),
    (
        "sierra-alcaravan",
        "2026-12-02T18:00:00Z",
        "19:00",
        "2026-12-02",
    ),
    (
        "sierra-alcaravan",
        "2026-12-02T22:30:00Z",
        "23:30",
        "2026-12-02",
    ),
    (
        "sierra-alcaravan",
        "2026-12-03T02:00:00Z",
        "03:00",
        "2026-12-02",
    ),
    // 07:30 before sunrise: still the night in progress.
    (
        "sierra-alcaravan",
        "2026-12-03T06:30:00Z",
        "07:30",
        "2026-12-02",
    ),
    // Just after local noon and just before it (the Sun is up).
    (
        "pampa-lucero",
        "2026-12-02T15:01:00Z",
        "12:01",
        "2026-12-02",
    ),
    (
        "sierra-alcaravan",
        "2026-12-02T10:59:00Z",
        "11:59",
        "2026-12-02",
    ),
];

fn at(t: &str) -> Instant {
    parse_instant(t).unwrap()
}

#[test]
fn the_library_rule_at_both_demo_sites() {
    for (site, utc, local, want) in CASES {
        let s = sites::resolve(site).unwrap();
        let t = at(utc);
        assert_eq!(
            t.local(&s.timezone).format("%H:%M").to_string(),
            local,
            "{site} {utc}"
        );
        assert_eq!(
            tonight(&s, t).unwrap().to_string(),
            want,
            "{site} at {local} local"
        );
    }
}

#[test]
fn the_ui_opens_on_the_same_night() {
    for (site, utc, local, want) in CASES {
        let mut setup = tui_support::setup_with(
            vec![],
            None,
            std::env::temp_dir().join("rung-night-rule-unused.csv"),
            true,
            (80, 24),
            false,
        );
        setup.settings = setup.settings.with_site(sites::resolve(site).unwrap());
        setup.date = None; // follow the clock
        setup.now = at(utc);
        let (s, _) = rung::tui::init(setup);
        assert_eq!(s.date.to_string(), want, "{site} at {local} local");
        assert!(s.live);
    }
}

#[test]
fn the_command_line_says_the_same_night() {
    let cfg = tempfile::tempdir().unwrap();
    for (site, utc, local, want) in CASES {
        let o = Command::new(env!("CARGO_BIN_EXE_rung"))
            .args(["night", "--site", site, "--json"])
            .env("RUNG_CONFIG_DIR", cfg.path())
            .env("RUNG_NOW", utc)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        assert_eq!(v["date"], want, "{site} at {local} local");
    }
}

/// `snr` and `exptime` without `--at` speak of tonight's sky: the coming
/// night's best time for the target, not the daylit present.
#[test]
fn snr_without_at_uses_the_coming_nights_best_time() {
    let cfg = tempfile::tempdir().unwrap();
    // 11:00 local at Pampa Lucero: the Sun is high; the coming night is 2026-12-02.
    let o = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args([
            "snr",
            "--site",
            "pampa-lucero",
            "--ra",
            "60",
            "--dec",
            "-30",
            "--mag",
            "18",
            "--exptime",
            "60",
            "--json",
        ])
        .env("RUNG_CONFIG_DIR", cfg.path())
        .env("RUNG_NOW", "2026-12-02T14:00:00Z")
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(v["sun_altitude_deg"].as_f64().unwrap() < -12.0, "{v}");
    let t = at(v["time"].as_str().unwrap());
    assert!(
        t.seconds_since(&at("2026-12-02T22:00:00Z")) > 0.0,
        "{}",
        t.iso()
    );
    assert!(
        t.seconds_since(&at("2026-12-03T10:00:00Z")) < 0.0,
        "{}",
        t.iso()
    );
    assert!(
        v["time_rule"]
            .as_str()
            .unwrap()
            .contains("night of 2026-12-02"),
        "{}",
        v["time_rule"]
    );
}
