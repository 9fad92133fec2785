//! `rung phase` end to end: the JSON contract and the bad-input messages.

use std::process::Command;

fn rung(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .env("RUNG_CONFIG_DIR", env!("CARGO_TARGET_TMPDIR"))
        .output()
        .expect("run rung");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

const STAR: [&str; 14] = [
    "phase",
    "--ra",
    "03:11:36",
    "--dec",
    "-03:18:00",
    "--epoch-max-bjd",
    "2461005.017",
    "--period-err-d",
    "0.0001",
    "--mean-mag",
    "12.4",
    "--from",
    "2026-12-01",
    "--json",
];

#[test]
fn json_has_the_contract_keys() {
    let mut a: Vec<&str> = STAR.to_vec();
    a.extend([
        "--period-d",
        "5.05",
        "--nights",
        "8",
        "--amplitude-mag",
        "0.8",
    ]);
    let (code, out, err) = rung(&a);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    for k in [
        "nights",
        "visits",
        "bins_covered",
        "nights_needed",
        "beat_period_d",
        "phase_sigma",
        "distance_precision_pct",
        "hours_needed",
        "cautions",
        "notes",
    ] {
        assert!(v.get(k).is_some(), "missing key {k}");
    }
    let n = &v["nights"][0];
    for k in [
        "night",
        "window_start",
        "window_end",
        "phase_start",
        "phase_end",
    ] {
        assert!(n.get(k).is_some(), "nights[] missing {k}");
    }
    let vis = &v["visits"][0];
    for k in ["time", "phase", "bin"] {
        assert!(vis.get(k).is_some(), "visits[] missing {k}");
    }
    assert_eq!(v["nights"].as_array().unwrap().len(), 8);
    // P = 5.05 d: alias 0/1, beat = P (see tests/pulsator_phase.rs for the rule).
    assert!((v["beat_period_d"].as_f64().unwrap() - 5.05).abs() < 1e-9);
    // Each visit's phase lies in its bin.
    for x in v["visits"].as_array().unwrap() {
        let p = x["phase"].as_f64().unwrap();
        let b = x["bin"].as_u64().unwrap() as f64;
        assert!((b / 10.0..(b + 1.0) / 10.0).contains(&p));
    }
    let pct = v["distance_precision_pct"].as_f64().unwrap();
    assert!(pct > 9.0 && pct < 12.0, "{pct}");
}

#[test]
fn bad_input_is_one_clear_line() {
    let mut a: Vec<&str> = STAR.to_vec();
    a.extend(["--period-d", "0", "--nights", "2"]);
    let (code, _, err) = rung(&a);
    assert_eq!(code, 2);
    assert!(
        err.contains("--period-d: 0 d is not within 0.01..3000 d"),
        "{err}"
    );
    assert_eq!(err.trim().lines().count(), 1);

    let (code, _, err) = rung(&["phase", "--ra", "10", "--dec", "-20", "--period-d", "3"]);
    assert_eq!(code, 2);
    assert!(err.contains("--epoch-max-bjd"), "{err}");

    let mut a: Vec<&str> = STAR.to_vec();
    a.extend(["--period-d", "3", "--amplitude-mag", "NaN", "--nights", "2"]);
    let (code, _, err) = rung(&a);
    assert_eq!(code, 2);
    assert!(
        err.contains("--amplitude-mag: NaN is not within 0..10 mag"),
        "{err}"
    );
}
