//! `rung snr`, `rung exptime` and the sky key of `rung where`, as a user runs them.

use serde_json::Value;
use std::process::{Command, Output};

fn rung(args: &[&str]) -> Output {
    let cfg = tempfile::tempdir().unwrap();
    Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .env("RUNG_CONFIG_DIR", cfg.path())
        .output()
        .unwrap()
}

fn json(args: &[&str]) -> Value {
    let o = rung(args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).unwrap()
}

const WHERE: [&str; 8] = [
    "--site",
    "pampa-lucero",
    "--ra",
    "60",
    "--dec",
    "-30",
    "--at",
    "2026-12-09T04:00:00Z",
];

const KEYS: [&str; 11] = [
    "snr",
    "exptime_s",
    "n_exposures",
    "sky_mag_arcsec2",
    "airmass",
    "moon_separation_deg",
    "star_electrons",
    "sky_electrons_per_pixel",
    "aperture_pixels",
    "peak_pixel_electrons",
    "saturated",
];

#[test]
fn snr_json_has_the_contract_keys() {
    let mut a = vec![
        "snr",
        "--mag",
        "18",
        "--band",
        "V",
        "--exptime",
        "300",
        "--json",
    ];
    a.extend(WHERE);
    let v = json(&a);
    for k in KEYS {
        assert!(v.get(k).is_some(), "missing {k}: {v}");
    }
    assert_eq!(v["exptime_s"].as_f64().unwrap(), 300.0);
    assert!(v["snr"].as_f64().unwrap() > 50.0);
    assert!(v["limiting_mag"].as_f64().unwrap() > 20.0);
    assert_eq!(v["saturated"], Value::Bool(false));
    assert!(v["cautions"].as_array().unwrap().is_empty());
}

#[test]
fn exptime_json_reaches_the_goal_and_agrees_with_snr() {
    let mut a = vec!["exptime", "--mag", "19.5", "--snr", "60", "--json"];
    a.extend(WHERE);
    let v = json(&a);
    for k in KEYS {
        assert!(v.get(k).is_some(), "missing {k}");
    }
    let t = v["exptime_s"].as_f64().unwrap();
    assert!((v["snr"].as_f64().unwrap() - 60.0).abs() < 1e-6);
    let ts = format!("{t}");
    let mut b = vec!["snr", "--mag", "19.5", "--exptime", &ts, "--json"];
    b.extend(WHERE);
    let w = json(&b);
    assert!((w["snr"].as_f64().unwrap() - 60.0).abs() < 1e-3);
}

#[test]
fn readable_output_breaks_down_the_noise() {
    let mut a = vec!["snr", "--mag", "18", "--exptime", "300"];
    a.extend(WHERE);
    let o = rung(&a);
    assert!(o.status.success());
    let s = String::from_utf8(o.stdout).unwrap();
    for w in [
        "star",
        "sky",
        "dark",
        "read",
        "scintillation",
        "total",
        "SNR",
        "peak pixel",
    ] {
        assert!(s.contains(w), "missing {w} in\n{s}");
    }
}

#[test]
fn date_uses_the_best_time_of_the_night() {
    let v = json(&[
        "exptime",
        "--mag",
        "20",
        "--snr",
        "20",
        "--site",
        "pampa-lucero",
        "--ra",
        "60",
        "--dec",
        "-30",
        "--date",
        "2026-12-09",
        "--json",
    ]);
    // The highest altitude with the Sun below the programme's limit (-12° by default).
    assert!(
        v["time_rule"]
            .as_str()
            .unwrap()
            .contains("night of 2026-12-09 with the Sun below -12°"),
        "{}",
        v["time_rule"]
    );
    assert!(v["sun_altitude_deg"].as_f64().unwrap() < -12.0);
    // The target culminates near the zenith at this latitude.
    assert!(v["airmass"].as_f64().unwrap() < 1.01);
}

#[test]
fn sun_caution_appears_near_the_sun() {
    // 2026-12-09 18:00 UTC is mid-afternoon at Pampa Lucero; the Sun is near
    // RA 17h, Dec −23°. A target there gets the caution (the sky model also
    // notes it is outside its validity).
    let o = rung(&[
        "snr",
        "--mag",
        "10",
        "--exptime",
        "1",
        "--site",
        "pampa-lucero",
        "--ra",
        "256",
        "--dec",
        "-23",
        "--at",
        "2026-12-09T18:00:00Z",
        "--json",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    let c = v["cautions"].as_array().unwrap();
    assert!(
        c.iter()
            .any(|x| x.as_str().unwrap().contains("SUN CAUTION")),
        "{v}"
    );
    assert!(!v["notes"].as_array().unwrap().is_empty());
}

#[test]
fn bad_input_exits_non_zero_with_one_line() {
    let cases: [&[&str]; 6] = [
        &["snr", "--mag", "NaN", "--exptime", "10"],
        &["snr", "--mag", "18", "--exptime", "-10"],
        &["snr", "--mag", "18", "--band", "Q", "--exptime", "10"],
        &["exptime", "--mag", "18", "--snr", "0"],
        &["exptime", "--mag", "18", "--snr", "-5"],
        &[
            "exptime",
            "--mag",
            "18",
            "--snr",
            "10",
            "--instrument",
            "nope",
        ],
    ];
    for c in cases {
        let mut a = c.to_vec();
        a.extend(WHERE);
        let o = rung(&a);
        assert!(!o.status.success(), "{c:?}");
        let err = String::from_utf8(o.stderr).unwrap();
        assert_eq!(err.trim_end().lines().count(), 1, "{c:?}: {err}");
        assert!(err.starts_with("rung: error: "), "{err}");
        assert!(o.stdout.is_empty());
    }
}

#[test]
fn where_json_gains_the_v_sky() {
    let mut a = vec!["where", "--json"];
    a.extend(WHERE);
    let v = json(&a);
    let s = v["sky_v_mag_arcsec2"].as_f64().unwrap();
    assert!(s > 20.0 && s < 22.5, "{s}");
    // Below the horizon it is null.
    let v = json(&[
        "where",
        "--json",
        "--site",
        "pampa-lucero",
        "--ra",
        "60",
        "--dec",
        "80",
        "--at",
        "2026-12-09T04:00:00Z",
    ]);
    assert!(v["sky_v_mag_arcsec2"].is_null());
}

#[test]
fn target_from_the_demo_programme_brings_its_magnitude_and_band() {
    let file = format!("{}/targets-demo/targets.csv", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&file).unwrap();
    let mut rdr = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let h = rdr.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let row = rdr
        .records()
        .map(|r| r.unwrap())
        .find(|r| !r[col("mag")].is_empty())
        .unwrap();
    let (name, mag) = (
        row[col("name")].to_string(),
        row[col("mag")].parse::<f64>().unwrap(),
    );
    let v = json(&[
        "snr",
        "--target",
        &name,
        "--targets",
        &file,
        "--exptime",
        "60",
        "--site",
        "pampa-lucero",
        "--date",
        "2026-12-09",
        "--json",
    ]);
    assert_eq!(v["target"].as_str().unwrap(), name);
    assert_eq!(v["mag"].as_f64().unwrap(), mag);
    assert!(v["snr"].as_f64().unwrap() > 0.0);
}

#[test]
fn hopeless_goals_are_said_to_be_out_of_reach() {
    // More than a night but less than a day: answered, with a note.
    let mut a = vec!["exptime", "--mag", "22.5", "--snr", "100", "--json"];
    a.extend(WHERE);
    let v = json(&a);
    assert!(v["exptime_s"].as_f64().unwrap() > 12.0 * 3600.0);
    let notes = v["notes"].as_array().unwrap();
    assert!(
        notes
            .iter()
            .any(|n| n.as_str().unwrap().contains("out of reach")),
        "{v}"
    );
    // More than a day (rung::bounds::EXPTIME_S): refused with the reason.
    let mut a = vec!["exptime", "--mag", "27", "--snr", "100"];
    a.extend(WHERE);
    let o = rung(&a);
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(
        String::from_utf8_lossy(&o.stderr),
        "rung: error: invalid exposure: a V = 27 star at SNR 100 needs 42801 h of exposure with lucero-1m, more than one visit may hold (24 h)\n"
    );
}
