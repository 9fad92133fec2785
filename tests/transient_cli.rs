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

/// The `notes` of a chase's JSON.
fn notes_of(v: &Value) -> Vec<&str> {
    v["notes"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|s| s.as_str())
        .collect()
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
    // The demo target at z = 0.026 with an 8 % goal: floor σ_μ from the
    // intrinsic scatter 0.12, the peculiar velocity (5/ln 10)(300/c z) ≈ 0.085,
    // the K-correction rung does not apply 2.5 log10(1.026) = 0.028 and the
    // zero point 0.03: 0.152 mag → 7.0 %, so the goal is reachable, and
    // `goal_met` says the same as the verdict and the numbers.
    assert!(
        (v["floor_pct"].as_f64().unwrap() - 7.0).abs() < 0.1,
        "{}",
        v["floor_pct"]
    );
    let pct = v["distance_precision_pct"].as_f64().unwrap();
    assert_eq!(v["goal_met"], pct <= 8.0);
    assert_eq!(v["verdict"]["verdict"], "reachable", "{pct}");
    assert_eq!(v["goal_met"], true);
    // Several bands, classification first, the terms and the roles.
    assert_eq!(v["bands"], serde_json::json!(["B", "V", "R"]));
    assert_eq!(v["provisional"], true);
    assert_eq!(v["classification"]["status"], "candidate");
    assert!(
        v["classification"]["spectrum"]["exptime_s"]
            .as_f64()
            .unwrap()
            > 0.0
    );
    assert_eq!(v["role"], "hubble_flow");
    assert_eq!(v["relation"], "stretch_colour");
    let e0 = &v["epochs"][0]["exposures"];
    assert_eq!(e0[0]["band"], "B");
    assert!(
        e0.as_array()
            .unwrap()
            .iter()
            .any(|x| x["band"] == "spectrum")
    );
    let terms = v["error_terms"].as_array().unwrap();
    let sum: f64 = terms
        .iter()
        .map(|t| t["sigma_mag"].as_f64().unwrap().powi(2))
        .sum();
    assert!((sum.sqrt() - v["sigma_mu_mag"].as_f64().unwrap()).abs() < 1e-9);
    assert!(terms.iter().any(|t| t["shared"] == true));
    assert!(v["sparser_cadences"].as_array().is_some());
    assert!(v["luminosity_distance_mpc"].as_f64().unwrap() > 100.0);
    // Why this cadence: what was compared, what passed and why it won, in
    // one wording for --json and the text (each sparser trial's own words
    // inside it).
    let k = &v["cadence_search"];
    let m = k["max_every_n"].as_u64().unwrap();
    assert_eq!(
        k["tried"].as_u64().unwrap(),
        m * (m + 1) / 2,
        "every g ≤ n ≤ {m}"
    );
    let choice = v["cadence_choice"].as_str().unwrap();
    assert!(
        choice.starts_with(&format!(
            "{} cadences compared (every g = 1–{m} nights around maximum, every n = g–{m} nights on the decline): {} meet the requirement",
            k["tried"], k["passing"]
        )),
        "{choice}"
    );
    assert!(
        choice.contains("takes the fewest telescope hours of them"),
        "{choice}"
    );
    for t in v["sparser_cadences"].as_array().unwrap() {
        assert!(choice.contains(t["text"].as_str().unwrap()), "{choice}");
    }
    let (code, out, err) = rung(&[
        "chase",
        "--target",
        "LPO-T2026a",
        "--now",
        "2026-12-01T12:00:00Z",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains(&format!("  why this cadence: {choice}\n")),
        "{out}"
    );
}

#[test]
fn goal_met_agrees_with_the_precision_at_every_redshift() {
    // The same invented supernova at three redshifts: `goal_met` and the
    // verdict follow the precision against the goal, never the design's
    // sizing; at 0.5 the chase is refused (the model stops at 0.3).
    for z in ["0.08", "0.15"] {
        let v = json(&[
            "chase",
            "--ra",
            "03:20:00",
            "--dec",
            "-30:00:00",
            "--discovered",
            "2026-11-28T04:00:00Z",
            "--mag",
            "19.5",
            "--redshift",
            z,
            "--now",
            "2026-12-01T12:00:00Z",
            "--goal",
            "8",
            "--json",
        ]);
        let pct = v["distance_precision_pct"].as_f64().unwrap();
        assert_eq!(v["goal_met"], pct <= 8.0, "z {z}: {pct}");
        assert_eq!(v["verdict"]["verdict"] == "reachable", pct <= 8.0, "z {z}");
    }
    let (code, _, err) = rung(&[
        "chase",
        "--ra",
        "03:20:00",
        "--dec",
        "-30:00:00",
        "--discovered",
        "2026-11-28T04:00:00Z",
        "--mag",
        "19.5",
        "--redshift",
        "0.5",
        "--now",
        "2026-12-01T12:00:00Z",
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("0.5 of transient is beyond 0.3"), "{err}");
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
    let notes = notes_of(&v);
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
    assert!(out.contains("verdict: provisional, reachable"), "{out}");
    assert!(out.contains("PROVISIONAL"), "{out}");
    assert!(out.contains("cadence: every"));
}

/// A discovery years before now (a date typed wrong, most often): the
/// template's tail is past any magnitude measured, and the chase says so
/// in words, on each night and once in its notes, rather than as a refused
/// 14-digit magnitude on every row.
#[test]
fn a_discovery_years_ago_says_it_has_faded_past_any_exposure() {
    // Without --now the chase runs over the programme's range from the
    // coming night (--now would refuse an instant past its 60-day horizon
    // after discovery); the clock is fixed.
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args([
            "chase",
            "--ra",
            "03:20:00",
            "--dec",
            "-30:00:00",
            "--discovered",
            "2020-11-15T04:00:00Z",
            "--mag",
            "18.3",
            "--redshift",
            "0.02",
            "--json",
        ])
        .env(
            "RUNG_CONFIG_DIR",
            concat!(env!("CARGO_MANIFEST_DIR"), "/target/no-user-config"),
        )
        .env("RUNG_NOW", "2026-11-15T12:00:00Z")
        .output()
        .expect("run rung");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).expect("valid JSON");
    let nights = v["nights"].as_array().unwrap();
    let reasons: Vec<&str> = nights.iter().filter_map(|n| n["reason"].as_str()).collect();
    assert!(!reasons.is_empty());
    for r in &reasons {
        assert!(
            r.starts_with("no exposure for B: predicted ")
                && r.ends_with(" mag, fainter than any exposure reaches (30 mag)"),
            "{r}"
        );
    }
    let notes = notes_of(&v);
    assert!(
        notes
            .iter()
            .any(|s| s.starts_with("it has faded past any exposure: B ")
                && s.ends_with("check the discovery date")),
        "{notes:?}"
    );
}

#[test]
fn bad_input_exits_non_zero_with_one_clear_line() {
    let base = ["chase", "--ra", "50", "--dec", "-30", "--mag", "18"];
    let cases: [(&[&str], &str); 6] = [
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
            "unknown band of the supernova template 'Q'",
        ),
        (
            &[
                "--discovered",
                "2026-11-15T04:00:00Z",
                "--now",
                "2026-11-20T00:00:00Z",
                "--bands",
                "V,R",
            ],
            "the chase's first band must be B",
        ),
        (
            &[
                "--discovered",
                "2026-11-15T04:00:00Z",
                "--now",
                "2026-11-20T00:00:00Z",
                "--classification",
                "II",
            ],
            "is classified as II",
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
fn a_tight_peak_requirement_buys_more_epochs_near_maximum() {
    // A tight peak-magnitude requirement (0.01 mag) with a 0.015 mag per-epoch
    // floor needs more epochs near maximum, where the peak is measured.
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
    assert!(v["near_max_every"].as_u64().unwrap() <= 3, "{}", v["notes"]);
    assert!(v["sigma_peak_mag"].as_f64().unwrap() <= 0.01);
    assert_eq!(v["design_meets_requirement"], true);
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
    assert!(w["hours_needed"].as_f64().unwrap() < v["hours_needed"].as_f64().unwrap());
}
