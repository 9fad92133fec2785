//! The `rung` binary with bad input, and the JSON contract of DESIGN.md.
//!
//! Rules checked (HELPER_RULES.md, DESIGN.md): bad input gets one line on stderr
//! per problem naming what and where (file, line, field for a file); the exit code
//! is non-zero (3 when some rows were skipped but the good ones were used); no
//! panic. `--json` output parses and carries every key DESIGN.md requires.

use serde_json::Value;
use std::path::Path;
use std::process::{Command, Output};

fn rung(args: &[&str], cfg: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        // Keep any user site catalogue of the machine out of the test.
        .env("XDG_CONFIG_HOME", cfg)
        .env("HOME", cfg)
        .env_remove("RUNG_DEMO_DIR")
        .output()
        .expect("run the rung binary")
}

fn stderr_lines(o: &Output) -> Vec<String> {
    String::from_utf8_lossy(&o.stderr)
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(str::to_string)
        .collect()
}

/// One error line that names every word in `must_name`, a non-zero exit, no panic.
fn assert_one_line_error(args: &[&str], must_name: &[&str]) {
    let cfg = tempfile::tempdir().unwrap();
    let o = rung(args, cfg.path());
    let err = String::from_utf8_lossy(&o.stderr).to_string();
    assert!(!err.contains("panicked"), "{args:?} panicked: {err}");
    assert!(!o.status.success(), "{args:?} succeeded");
    assert!(
        o.status.code().is_some_and(|c| c != 0),
        "{args:?}: {:?}",
        o.status
    );
    let lines = stderr_lines(&o);
    assert_eq!(
        lines.len(),
        1,
        "{args:?}: expected one stderr line, got {lines:?}"
    );
    for w in must_name {
        assert!(
            lines[0].contains(w),
            "{args:?}: '{}' does not name {w}",
            lines[0]
        );
    }
}

const AT: &str = "2026-12-01T03:00:00Z";

#[test]
fn unknown_site() {
    assert_one_line_error(
        &[
            "where",
            "--site",
            "no-such-peak",
            "--ra",
            "10",
            "--dec",
            "-20",
            "--at",
            AT,
        ],
        &["--site", "no-such-peak", "unknown site"],
    );
    assert_one_line_error(
        &["night", "--site", "no-such-peak", "--date", "2026-12-01"],
        &["--site", "no-such-peak"],
    );
}

#[test]
fn latitude_out_of_range() {
    assert_one_line_error(
        &[
            "where",
            "--site",
            "95,10,100",
            "--ra",
            "10",
            "--dec",
            "-20",
            "--at",
            AT,
        ],
        &["--site", "latitude", "95"],
    );
    assert_one_line_error(
        &["night", "--site", "95,10,100", "--date", "2026-12-01"],
        &["--site", "latitude", "95"],
    );
}

#[test]
fn malformed_time() {
    for bad in ["2026-12-01T25:61:00", "yesterday", "2026-13-01T00:00:00Z"] {
        assert_one_line_error(
            &[
                "where",
                "--site",
                "pampa-lucero",
                "--ra",
                "10",
                "--dec",
                "-20",
                "--at",
                bad,
            ],
            &["--at", "time", bad],
        );
    }
}

#[test]
fn impossible_date() {
    assert_one_line_error(
        &["night", "--site", "pampa-lucero", "--date", "2026-02-30"],
        &["--date", "2026-02-30"],
    );
}

#[test]
fn csv_with_broken_rows_keeps_the_good_ones() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("mixed.csv");
    std::fs::write(
        &file,
        "name,kind,ra,dec\n\
         GOOD-1,plain,10.0,-20.0\n\
         BAD-RA,plain,abc,-20.0\n\
         GOOD-2,plain,05:34:31.9,+22:00:52\n\
         BAD-DEC,plain,30.0,-95\n",
    )
    .unwrap();
    let f = file.to_str().unwrap();
    let o = rung(
        &[
            "night",
            "--site",
            "pampa-lucero",
            "--date",
            "2026-12-01",
            "--targets",
            f,
            "--json",
        ],
        dir.path(),
    );
    let err = String::from_utf8_lossy(&o.stderr).to_string();
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(
        o.status.code(),
        Some(3),
        "exit code with skipped rows; stderr {err}"
    );
    let lines = stderr_lines(&o);
    assert_eq!(lines.len(), 2, "one line per broken row: {lines:?}");
    for (line, (row, field, name)) in lines.iter().zip([(3, "ra", "abc"), (5, "dec", "-95")]) {
        assert!(line.contains(f), "'{line}' does not name the file");
        assert!(
            line.contains(&format!("line {row}")),
            "'{line}' does not name line {row}"
        );
        assert!(line.contains(field), "'{line}' does not name field {field}");
        assert!(line.contains(name), "'{line}' does not quote {name}");
    }
    let v: Value = serde_json::from_slice(&o.stdout).expect("stdout is JSON");
    let names: Vec<&str> = v["targets"]
        .as_array()
        .expect("targets array")
        .iter()
        .map(|t| t["name"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["GOOD-1", "GOOD-2"]);

    // The same file in table form: the good rows are printed.
    let o = rung(
        &[
            "night",
            "--site",
            "pampa-lucero",
            "--date",
            "2026-12-01",
            "--targets",
            f,
        ],
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(3));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("GOOD-1") && out.contains("GOOD-2") && !out.contains("BAD-"));

    // A file with no usable row at all is an error, still without a panic.
    let none = dir.path().join("none.csv");
    std::fs::write(&none, "name,kind,ra,dec\nBAD,plain,400,0\n").unwrap();
    let o = rung(
        &[
            "night",
            "--site",
            "pampa-lucero",
            "--date",
            "2026-12-01",
            "--targets",
            none.to_str().unwrap(),
        ],
        dir.path(),
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && !err.contains("panicked"), "{err}");
}

fn assert_keys(v: &Value, keys: &[&str], what: &str) {
    let o = v
        .as_object()
        .unwrap_or_else(|| panic!("{what} is not an object"));
    for k in keys {
        assert!(o.contains_key(*k), "{what}: key {k} missing");
    }
}

fn is_iso_or_null(v: &Value) -> bool {
    v.is_null()
        || v.as_str()
            .is_some_and(|s| s.len() == 20 && s.ends_with('Z') && s.as_bytes()[10] == b'T')
}

#[test]
fn where_json_has_the_design_keys() {
    let cfg = tempfile::tempdir().unwrap();
    let o = rung(
        &[
            "where",
            "--site",
            "pampa-lucero",
            "--ra",
            "05:34:31.9",
            "--dec",
            "+22:00:52",
            "--at",
            AT,
            "--json",
        ],
        cfg.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: Value = serde_json::from_slice(&o.stdout).expect("stdout is JSON");
    let keys = [
        "altitude_deg",
        "altitude_geometric_deg",
        "azimuth_deg",
        "airmass",
        "hour_angle_h",
        "parallactic_angle_deg",
        "sun_altitude_deg",
        "moon_altitude_deg",
        "moon_separation_deg",
        "moon_illumination",
        "pressure_hpa",
        "temperature_c",
    ];
    assert_keys(&v, &keys, "rung where --json");
    for k in keys.iter().filter(|k| **k != "airmass") {
        assert!(v[*k].is_number(), "{k} is not a number: {}", v[*k]);
    }
    assert!(v["airmass"].is_number() || v["airmass"].is_null());
    let k = v["moon_illumination"].as_f64().unwrap();
    assert!((0.0..=1.0).contains(&k));
}

#[test]
fn night_json_has_the_design_keys() {
    let cfg = tempfile::tempdir().unwrap();
    let o = rung(
        &[
            "night",
            "--site",
            "pampa-lucero",
            "--date",
            "2026-12-01",
            "--json",
            "--targets",
            "targets-demo/targets.csv",
        ],
        cfg.path(),
    );
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let v: Value = serde_json::from_slice(&o.stdout).expect("stdout is JSON");
    let events = [
        "sunset",
        "sunrise",
        "civil_dusk",
        "civil_dawn",
        "nautical_dusk",
        "nautical_dawn",
        "astronomical_dusk",
        "astronomical_dawn",
        "moonrise",
        "moonset",
    ];
    assert_keys(&v, &events, "rung night --json");
    assert_keys(&v, &["moon_illumination", "targets"], "rung night --json");
    for k in events {
        assert!(is_iso_or_null(&v[k]), "{k}: {}", v[k]);
    }
    let targets = v["targets"].as_array().expect("targets array");
    assert!(
        targets.len() >= 20,
        "demo programme has {} targets",
        targets.len()
    );
    for t in targets {
        let what = format!("target {}", t["name"]);
        assert_keys(
            t,
            &[
                "name",
                "rise",
                "transit",
                "set",
                "window_start",
                "window_end",
                "max_altitude_deg",
                "min_airmass",
                "max_altitude_time",
                "moon_separation_deg",
                "sun_caution",
            ],
            &what,
        );
        for k in ["rise", "transit", "set", "window_start", "window_end"] {
            assert!(is_iso_or_null(&t[k]), "{what} {k}: {}", t[k]);
        }
    }
}
