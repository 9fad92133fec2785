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

/// docs/bad-input.md, "Pulsator classes and relations": each answer word for word.
#[test]
fn relation_refusals_word_for_word() {
    let demo = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo/targets.csv");
    let base = [
        "phase",
        "--targets",
        demo,
        "--target",
        "LPO-C05",
        "--from",
        "2026-12-01",
        "--nights",
        "3",
    ];
    let run = |extra: &[&str]| {
        let mut a: Vec<&str> = base.to_vec();
        a.extend(extra);
        rung(&a)
    };
    // L1
    let (code, _, err) = run(&["--class", "quasar"]);
    assert_eq!(code, 2);
    assert_eq!(
        err.trim(),
        "rung: error: invalid --class: 'quasar' is not a pulsator class rung has relations for: cepheid, rrlyrae, mira"
    );
    // L2
    let (code, _, err) = run(&["--feh-dex", "3"]);
    assert_eq!(code, 2);
    assert_eq!(
        err.trim(),
        "rung: error: invalid --feh-dex: 3 dex is not within -5..1 dex: pulsators used for distances run from about -3 dex (metal-poor RR Lyrae stars) to about +0.5 dex (inner-disc Cepheids); no star is known below -5 dex with a pulsation distance or above +1 dex"
    );
    // L3: the phases are still planned; the distance is refused in the notes.
    let (code, out, err) = run(&["--period-d", "0.55", "--class", "cepheid", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(v["distance_precision_pct"].is_null() && v["relation"].is_null());
    assert_eq!(v["class"], "cepheid");
    let notes: Vec<&str> = v["notes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|n| n.as_str().unwrap())
        .collect();
    assert!(
        notes.contains(&"invalid period_d of target 'LPO-C05': 0.55 d is outside the classical Cepheid V relation's range 3.7–35.6 d (Benedict et al. 2007, AJ 133, 1810); it is not applied outside the periods it was calibrated on: a star this short is no classical Cepheid (RR Lyrae stars pulsate in 0.2–1 d: give class = rrlyrae): no distance"),
        "{notes:?}"
    );
    // L4: no class given and no relation covers 2 d.
    let (code, out, _) = run(&["--period-d", "2", "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(v["class"].is_null() && v["distance_precision_pct"].is_null());
    assert!(
        v["notes"].as_array().unwrap().iter().any(|n| n.as_str().unwrap()
            == "invalid class of target 'LPO-C05': no relation covers a 2 d period (classical Cepheid 3–100 d, RR Lyrae star 0.2–1 d, Mira 100–420 d): no class can be inferred and no distance given; give the class and a relation valid at this period: no distance"),
        "{:#}",
        v["notes"]
    );
    // The same star as an RR Lyrae star: accepted, the class said.
    let (code, out, err) = run(&["--period-d", "0.55", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["class"], "rrlyrae");
    assert_eq!(v["class_from"], "inferred");
    assert_eq!(v["relation"]["band"], "V");
    assert!(v["sigma_feh_mag"].as_f64().unwrap() > 0.1);
}

/// A targets file's class and metallicity columns are read and checked
/// (docs/bad-input.md L5, L6).
#[test]
fn class_and_metallicity_columns() {
    let dir = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("cls_columns");
    std::fs::create_dir_all(&dir).unwrap();
    let f = dir.join("t.csv");
    std::fs::write(
        &f,
        "name,kind,ra,dec,band,period_d,epoch_max_bjd,mean_mag,class,feh_dex,feh_err_dex\n\
         RR-A,pulsator,03:11:36,-03:18:00,V,0.55,2461005.017,13.1,rrlyrae,-1.2,0.1\n\
         RR-B,pulsator,03:11:36,-03:18:00,V,0.55,2461005.017,13.1,quasar,,\n\
         RR-C,pulsator,03:11:36,-03:18:00,V,0.55,2461005.017,13.1,,-7,\n",
    )
    .unwrap();
    let fs = f.to_str().unwrap();
    let (code, out, err) = rung(&[
        "phase",
        "--targets",
        fs,
        "--target",
        "RR-A",
        "--from",
        "2026-12-01",
        "--nights",
        "2",
        "--instrument",
        "lucero-1m",
        "--json",
    ]);
    // RR-B and RR-C are refused rows (exit 3), RR-A is planned.
    assert_eq!(code, 3, "{err}");
    assert!(
        err.contains(&format!(
            "{fs}, line 3, field 'class': 'quasar' is not one of cepheid, rrlyrae, mira"
        )),
        "{err}"
    );
    assert!(
        err.contains(&format!(
            "{fs}, line 4, field 'feh_dex': -7 dex is not within -5..1 dex"
        )),
        "{err}"
    );
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["class"], "rrlyrae");
    assert_eq!(v["class_from"], "given");
    assert_eq!(v["feh_dex"], -1.2);
    // |γ| σ[Fe/H] = 0.214 × 0.1 (Clementini et al. 2003, M_V–[Fe/H]).
    assert!((v["sigma_feh_mag"].as_f64().unwrap() - 0.0214).abs() < 1e-12);
}

/// `--band K` with the near-infrared camera: the K relation, the infrared
/// sky, the extinction carried from V to K; with the optical camera a clear
/// refusal naming the camera that has K (docs/bad-input.md L7).
#[test]
fn band_k_with_the_infrared_camera() {
    let demo = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo/targets.csv");
    let base = [
        "phase",
        "--targets",
        demo,
        "--target",
        "LPO-C05",
        "--from",
        "2026-12-01",
        "--nights",
        "20",
        "--band",
        "K",
        "--mean-mag",
        "11.5",
    ];
    let mut a = base.to_vec();
    a.extend(["--instrument", "lucero-1m-ir", "--json"]);
    let (code, out, err) = rung(&a);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["band"], "K");
    assert_eq!(v["instrument"], "lucero-1m-ir");
    assert_eq!(v["relation"]["band"], "K");
    assert_eq!(v["relation"]["class"], "cepheid");
    // The demo star's A_V = 0.81 becomes A_K = 0.81 × A_K/A_V; CCM (1989) at
    // 2.159 µm, R_V = 3.1: A_K/A_V = 0.1158 (by hand from the law's infrared
    // form 0.574 x^1.61 − 0.527 x^1.61/3.1, x = 0.4632 µm⁻¹) → 0.0938 mag.
    let a_k = v["extinction_mag"].as_f64().unwrap();
    assert!((a_k - 0.0938).abs() < 0.001, "{a_k}");
    // K: the relation's 0.09 mag scatter instead of V's 0.21.
    assert_eq!(v["sigma_scatter_mag"], 0.09);
    assert!(v["distance_precision_pct"].as_f64().unwrap() < 6.0);
    // Exposures exist and are split into 60-s frames at most.
    for x in v["visits"].as_array().unwrap() {
        assert!(x["exptime_s"].as_f64().unwrap() > 0.0);
    }
    let mut a = base.to_vec();
    a.extend(["--instrument", "lucero-1m"]);
    let (code, _, err) = rung(&a);
    assert_eq!(code, 2);
    assert_eq!(
        err.trim(),
        "rung: error: unknown band for instrument lucero-1m 'K'; it has throughput for: B, I, R, U, V; instruments with K: lucero-1m-ir"
    );
}

#[test]
fn messages_round_the_magnitudes_they_print() {
    // A faint Cepheid (mean V 21.30, amplitude 0.70: its faint phase is
    // 21.30 + 0.35, 21.650000000000002 in floating point) that no visit can
    // expose at SNR 100 (the SNR its goal below the floor asks over the
    // thirty months): the message says V = 21.65.
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("faint.csv");
    std::fs::write(
        &f,
        "name,kind,ra,dec,band,period_d,epoch_max_bjd,period_err_d,amplitude_mag,mean_mag,extinction_mag,goal_pct\n\
         F1,pulsator,01:36:20.7,-33:41:35,V,5.186,2461003.5695,0.00020,0.7,21.30,0.33,5\n",
    )
    .unwrap();
    let (code, out, err) = rung(&[
        "budget",
        "--site",
        "pampa-lucero",
        "--targets",
        f.to_str().unwrap(),
        "--from",
        "2026-12-01",
        "--to",
        "2029-05-31",
    ]);
    let all = format!("{out}{err}");
    assert!(all.contains("a V = 21.65 star at SNR"), "{code} {all}");
    assert!(!all.contains("21.6500000"), "{all}");
}

#[test]
fn a_stale_ephemeris_gets_no_reachable_verdict() {
    // P = 5.05 ± 0.01 d from an epoch in 2026: by December 2026 a predicted
    // maximum is already ±0.15 cycle off (σφ = n σ_P / P after n cycles),
    // past the 0.1 cycle of config/pulsator.toml; with ±0.0001 d it is not.
    let verdict = |err: &str| {
        let mut a: Vec<&str> = STAR.to_vec();
        let i = a.iter().position(|x| *x == "0.0001").unwrap();
        a[i] = err;
        a.extend([
            "--period-d",
            "5.05",
            "--amplitude-mag",
            "0.8",
            "--goal-pct",
            "12",
        ]);
        let (code, out, err) = rung(&a);
        assert_eq!(code, 0, "{err}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        (v["verdict"].clone(), v["notes"].to_string())
    };
    let (fresh, _) = verdict("0.0001");
    assert_eq!(fresh["label"], "reachable", "{fresh}");
    let (stale, notes) = verdict("0.01");
    assert_eq!(stale["label"], "stale_ephemeris", "{stale}");
    assert!(
        stale["phase_sigma_cycles"].as_f64().unwrap() > 0.1,
        "{stale}"
    );
    assert!(
        stale["text"]
            .as_str()
            .unwrap()
            .starts_with("needs its ephemeris refreshed"),
        "{stale}"
    );
    assert!(notes.contains("rung phase --maxima"), "{notes}");
}
