//! `rung chase` end to end: the JSON contract, the demo transients of the
//! invented programme at the invented site, and refused input.

use serde_json::Value;
use std::process::Command;

fn rung(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .env(
            "RUNG_DEMO_DIR",
            concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo"),
        )
        .env(
            "RUNG_CONFIG_DIR",
            concat!(env!("CARGO_MANIFEST_DIR"), "/target/no-user-config"),
        )
        .output()
        .expect("run rung");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn json(args: &[&str]) -> Value {
    let (code, out, err) = rung(args);
    assert_eq!(code, 0, "{err}");
    serde_json::from_str(&out).expect("valid JSON")
}

#[test]
fn json_carries_the_contract_keys() {
    let v = json(&[
        "chase",
        "--target",
        "LPO-T2026a",
        "--now",
        "2026-12-01T12:00:00Z",
        "--json",
    ]);
    for k in [
        "nights",
        "last_night",
        "cadence_days",
        "epochs",
        "sigma_peak_mag",
        "sigma_dm15",
        "distance_precision_pct",
        "hours_needed",
        "cautions",
        "notes",
    ] {
        assert!(v.get(k).is_some(), "missing key {k}");
    }
    let nights = v["nights"].as_array().unwrap();
    // From the night of --now to 60 nights after the discovery night (2026-11-27 local).
    assert_eq!(nights.first().unwrap()["night"], "2026-11-30");
    assert_eq!(nights.last().unwrap()["night"], "2027-01-26");
    for k in [
        "night",
        "window_start",
        "window_end",
        "expected_mag",
        "exptime_s",
    ] {
        assert!(nights[1].get(k).is_some(), "nights[] lacks {k}");
    }
    let n1 = &nights[1];
    assert!(n1["window_start"].is_string() && n1["exptime_s"].as_f64().unwrap() > 0.0);
    assert!(v["epochs"].as_array().unwrap().len() >= 4);
    assert!(v["sigma_dm15"].as_f64().unwrap() < 0.2);
    assert!(v["hours_needed"].as_f64().unwrap() > 0.0);
    // The demo target's goal (8 %) lies below its floor at z = 0.0135:
    // σ_pec = 2.1715 × 300 / (299 792.458 × 0.0135) = 0.161 mag, and with
    // 0.14 intrinsic and 0.05 extinction σ_μ ≥ 0.219 mag → 10.1 %.
    assert_eq!(v["verdict"]["verdict"], "limited_by_floor");
    assert!((v["floor_pct"].as_f64().unwrap() - 10.1).abs() < 0.1);
}

#[test]
fn demo_transient_near_the_sun_gets_few_nights_and_says_so() {
    let v = json(&[
        "chase",
        "--target",
        "LPO-T2026b",
        "--now",
        "2026-12-01T12:00:00Z",
        "--json",
    ]);
    let usable = v["nights"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|n| n["usable"] == true)
        .count();
    assert!(usable <= 8, "usable {usable}");
    assert_eq!(v["verdict"]["verdict"], "not_observable");
    let notes: Vec<&str> = v["notes"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|s| s.as_str())
        .collect();
    assert!(
        notes.iter().any(|s| s.contains("peak is missed")),
        "{notes:?}"
    );
}

#[test]
fn table_output_names_the_verdict() {
    let (code, out, err) = rung(&[
        "chase",
        "--ra",
        "03:20:00",
        "--dec",
        "-30:00:00",
        "--discovered",
        "2026-11-15T04:00:00Z",
        "--mag",
        "18.3",
        "--redshift",
        "0.02",
        "--now",
        "2026-11-15T12:00:00Z",
        "--goal",
        "12",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("verdict: goal reachable"), "{out}");
    assert!(out.contains("cadence: every"));
}

#[test]
fn bad_input_exits_non_zero_with_one_clear_line() {
    let base = ["chase", "--ra", "50", "--dec", "-30", "--mag", "18"];
    let cases: [(&[&str], &str); 5] = [
        (
            &[
                "--discovered",
                "2026-11-25T04:00:00Z",
                "--now",
                "2026-11-20T00:00:00Z",
            ],
            "in the future",
        ),
        (
            &[
                "--discovered",
                "2026-11-15T04:00:00Z",
                "--now",
                "2026-11-20T00:00:00Z",
                "--redshift",
                "-0.01",
            ],
            "invalid --redshift: -0.01 is not within 0..3",
        ),
        (
            &[
                "--discovered",
                "2026-11-15T04:00:00Z",
                "--now",
                "2026-11-20T00:00:00Z",
                "--band",
                "Q",
            ],
            "unknown band 'Q'",
        ),
        (
            &[
                "--discovered",
                "2026-11-15T04:00:00Z",
                "--now",
                "2026-11-20T00:00:00Z",
                "--band",
                "R",
            ],
            "defined for B only",
        ),
        (
            &["--discovered", "yesterday", "--now", "2026-11-20T00:00:00Z"],
            "cannot read time",
        ),
    ];
    for (extra, want) in cases {
        let args: Vec<&str> = base.iter().chain(extra.iter()).copied().collect();
        let (code, out, err) = rung(&args);
        assert_ne!(code, 0, "{args:?} succeeded: {out}");
        assert!(err.contains(want), "{args:?}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(!err.contains("panicked"));
    }
    let (code, _, err) = rung(&[
        "chase",
        "--target",
        "LPO-P01",
        "--now",
        "2026-12-01T00:00:00Z",
    ]);
    assert_ne!(code, 0);
    assert!(err.contains("not a transient"), "{err}");
}

#[test]
fn a_dense_run_around_maximum_is_chosen_when_it_pays() {
    // A tight peak-magnitude requirement (0.01 mag) with a 0.015 mag per-epoch
    // floor needs many epochs near maximum, where the peak is measured; a
    // regular cadence would pay for them all season long.
    let v = json(&[
        "chase",
        "--ra",
        "03:20:00",
        "--dec",
        "-30:00:00",
        "--discovered",
        "2026-11-15T04:00:00Z",
        "--mag",
        "18.3",
        "--redshift",
        "0.02",
        "--now",
        "2026-11-15T12:00:00Z",
        "--goal",
        "12",
        "--sigma-peak",
        "0.01",
        "--snr",
        "30",
        "--json",
    ]);
    assert_eq!(v["dense_around_max"], true, "{}", v["notes"]);
    assert!(v["sigma_peak_mag"].as_f64().unwrap() <= 0.01);
    assert!(v["cadence_days"].as_u64().unwrap() >= 2);
    assert_eq!(v["goal_met"], true);
    // Without the extra requirement a sparse regular cadence does.
    let w = json(&[
        "chase",
        "--ra",
        "03:20:00",
        "--dec",
        "-30:00:00",
        "--discovered",
        "2026-11-15T04:00:00Z",
        "--mag",
        "18.3",
        "--redshift",
        "0.02",
        "--now",
        "2026-11-15T12:00:00Z",
        "--goal",
        "12",
        "--snr",
        "30",
        "--json",
    ]);
    assert_eq!(w["dense_around_max"], false);
    assert!(w["hours_needed"].as_f64().unwrap() < v["hours_needed"].as_f64().unwrap());
}
