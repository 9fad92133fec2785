//! `rung parallax` as a user runs it: the JSON contract, cautions, and clear
//! one-line errors for bad input (exit code 2, no panic).

use std::process::Command;

fn rung(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .env(
            "RUNG_CONFIG_DIR",
            std::env::temp_dir().join("rung-parallax-cli-test-none"),
        )
        .output()
        .expect("rung runs");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn json(args: &[&str]) -> serde_json::Value {
    let (code, out, err) = rung(args);
    assert_eq!(code, 0, "{err}");
    serde_json::from_str(&out).expect("JSON output")
}

/// The JSON keys are a contract (DESIGN.md, issue 4): series items with night,
/// pf_ra, pf_dec, observable, best_time; epochs; the sigmas, precision and hours;
/// cautions and notes.
#[test]
fn json_has_the_contract_keys() {
    let v = json(&[
        "parallax",
        "--target",
        "LPO-P01",
        "--from",
        "2026-12-01",
        "--to",
        "2029-05-31",
        "--json",
    ]);
    for k in [
        "dcr_bias_mas",
        "absolute_correction_mas",
        "sigma_parallax_total_mas",
        "reference_frame",
        "exposure_rule",
        "min_baseline_yr",
        "verdict_reason",
        "error_terms",
        "series",
        "epochs",
        "sigma_parallax_mas",
        "sigma_pm_masyr",
        "distance_precision_pct",
        "hours_needed",
        "cautions",
        "notes",
        "ellipse",
        "corr_parallax_pm",
        "verdict",
    ] {
        assert!(v.get(k).is_some(), "missing {k}");
    }
    let series = v["series"].as_array().unwrap();
    assert_eq!(series.len(), 913);
    for k in ["night", "pf_ra", "pf_dec", "observable", "best_time"] {
        assert!(series[0].get(k).is_some(), "series missing {k}");
    }
    let epochs = v["epochs"].as_array().unwrap();
    assert!(epochs.len() >= 3);
    for k in [
        "time",
        "snr",
        "exptime_s",
        "airmass",
        "sigma_mas",
        "pf_ra",
        "pf_dec",
        "hour_angle_h",
        "frames",
        "sigma_terms",
        "tan_z",
        "parallactic_angle_deg",
        "dcr_ra_mas",
        "dcr_dec_mas",
    ] {
        assert!(epochs[0].get(k).is_some(), "epochs missing {k}");
    }
    assert!(v["sigma_parallax_mas"].as_f64().unwrap() > 0.0);
    // The distance precision is σϖ of the fit, the DCR bias bound and the
    // absolute correction in quadrature, over ϖ = 68.4 mas.
    let pct = v["distance_precision_pct"].as_f64().unwrap();
    let s = v["sigma_parallax_mas"].as_f64().unwrap();
    let b = v["dcr_bias_mas"].as_f64().unwrap();
    let a = v["absolute_correction_mas"].as_f64().unwrap();
    let total = v["sigma_parallax_total_mas"].as_f64().unwrap();
    assert!((total - (s * s + b * b + a * a).sqrt()).abs() < 1e-9);
    assert!((pct - 100.0 * total / 68.4).abs() < 1e-9);
    assert_eq!(v["verdict"]["label"], "reachable");
    assert!(v["baseline_yr"].as_f64().unwrap() >= 2.0);
    // Each epoch's σ is its terms in quadrature.
    for e in epochs {
        let t = &e["sigma_terms"];
        let q: f64 = [
            "centroid_mas",
            "reference_mas",
            "image_motion_mas",
            "refraction_mas",
            "floor_mas",
        ]
        .iter()
        .map(|k| t[k].as_f64().unwrap().powi(2))
        .sum::<f64>()
        .sqrt();
        assert!((q - e["sigma_mas"].as_f64().unwrap()).abs() < 1e-9);
    }
    // An unobservable night carries no best time.
    assert!(
        series
            .iter()
            .any(|n| !n["observable"].as_bool().unwrap() && n["best_time"].is_null())
    );
}

/// Safety (HELPER_RULES, DESIGN.md): an epoch near the Sun while it is up gets
/// a caution. And an inverse parallax with σ_ϖ/ϖ above 10 % is flagged as a
/// biased distance (Lutz & Kelker 1973, quoted from memory).
#[test]
fn user_epochs_near_the_sun_get_a_caution_and_lutz_kelker_warning() {
    let v = json(&[
        "parallax",
        "--ra",
        "10",
        "--dec",
        "0",
        "--parallax-mas",
        "50",
        "--mag",
        "12",
        "--from",
        "2027-03-01",
        "--to",
        "2027-03-31",
        "--epoch",
        "2027-03-21T16:00:00Z",
        "--epoch",
        "2027-03-22T16:00:00Z",
        "--epoch",
        "2027-03-25T16:00:00Z",
        "--json",
    ]);
    let c = v["cautions"].as_array().unwrap();
    assert_eq!(c.len(), 3);
    assert!(c[0].as_str().unwrap().contains("SUN CAUTION"));
    assert!(v["lutz_kelker_warning"].as_bool().unwrap());
    let notes: Vec<&str> = v["notes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|n| n.as_str().unwrap())
        .collect();
    assert!(notes.iter().any(|n| n.contains("Lutz & Kelker")));
    assert!(notes.iter().any(|n| n.contains("outside ±1.0 h")));
}

fn fails_with(args: &[&str], needle: &str) {
    let (code, out, err) = rung(args);
    assert_eq!(code, 2, "stdout {out} stderr {err}");
    assert!(err.contains(needle), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "one line: {err}");
    assert!(!err.contains("panicked"));
}

#[test]
fn bad_input_gives_one_clear_line() {
    fails_with(
        &[
            "parallax",
            "--ra",
            "10",
            "--dec",
            "-20",
            "--parallax-mas",
            "-5",
            "--mag",
            "12",
        ],
        "--parallax-mas: -5 mas is not within (0, 1000] mas",
    );
    fails_with(
        &["parallax", "--ra", "10", "--dec", "-20", "--mag", "12"],
        "--parallax-mas",
    );
    fails_with(
        &[
            "parallax",
            "--ra",
            "200",
            "--dec",
            "75",
            "--parallax-mas",
            "5",
            "--mag",
            "12",
            "--from",
            "2027-01-01",
            "--to",
            "2027-02-01",
        ],
        "never observable",
    );
    let empty = std::env::temp_dir().join("rung-parallax-empty-epochs.txt");
    std::fs::write(&empty, "# no epochs here\n").unwrap();
    fails_with(
        &[
            "parallax",
            "--target",
            "LPO-P01",
            "--epochs-file",
            empty.to_str().unwrap(),
        ],
        "empty",
    );
    fails_with(
        &[
            "parallax",
            "--target",
            "LPO-P01",
            "--epoch",
            "2027-01-01T03:00:00Z",
        ],
        "at least three",
    );
    fails_with(
        &["parallax", "--target", "LPO-P01", "--axis", "sideways"],
        "ra, dec or combined",
    );
    fails_with(
        &["parallax", "--target", "NO-SUCH", "--from", "2027-01-01"],
        "no target named",
    );
    fails_with(
        &["parallax", "--target", "LPO-P01", "--fraction", "1.5"],
        "invalid --fraction: 1.5 is not within 0..1",
    );
}

/// Goal mode short of the goal: the verdict's season count and the added
/// `goal_reach` object (how far the range's nights go when continued to the
/// horizon) agree, and the floor they report lies below the goal the count
/// says is reachable. Demo target LPO-P02 (invented) over eighteen months.
#[test]
fn goal_mode_shortfall_reports_a_count_and_the_floor_below_the_goal() {
    let v = json(&[
        "parallax",
        "--target",
        "LPO-P02",
        "--from",
        "2026-12-01",
        "--to",
        "2028-05-31",
        "--sun-alt",
        "-12",
        "--goal-pct",
        "3",
        "--json",
    ]);
    assert_eq!(v["verdict"]["verdict"], "needs_more_seasons", "{v:#}");
    let r = &v["goal_reach"];
    let n = v["verdict"]["seasons"].as_u64().unwrap();
    assert_eq!(r["seasons_needed"].as_u64(), Some(n));
    assert!(n as usize > v["seasons_available"].as_u64().unwrap() as usize);
    assert!(r["floor_pct"].as_f64().unwrap() < 3.0, "{r:#}");
    assert!(r["range_best_pct"].as_f64().unwrap() > 3.0, "{r:#}");
    assert!(r["horizon_yr"].as_f64().unwrap() >= 12.0 - 1e-9);
    assert!(r["reached_by_night"].as_str().unwrap() > "2028-05-31");
    for key in ["snr", "range_seasons", "horizon_seasons", "full_year"] {
        assert!(!r[key].is_null(), "{key} missing: {r:#}");
    }
}

/// The DCR bias bound and the relative-to-absolute correction are named with
/// the same numbers by `rung parallax` (text and JSON) and `rung budget`
/// (text and JSON): one demo target (LPO-P03, invented) over thirty months,
/// the demo programme's settings given on the command line.
#[test]
fn dcr_bias_and_absolute_correction_agree_in_parallax_and_budget() {
    let demo = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv"),
    )
    .unwrap();
    let keep: Vec<&str> = demo
        .lines()
        .filter(|l| l.starts_with("name,") || l.starts_with("LPO-P03,"))
        .collect();
    assert_eq!(keep.len(), 2);
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("one.csv");
    std::fs::write(&file, keep.join("\n") + "\n").unwrap();
    let file = file.to_str().unwrap();
    let common = [
        "--targets",
        file,
        "--site",
        "pampa-lucero",
        "--instrument",
        "lucero-1m",
        "--from",
        "2026-12-01",
        "--to",
        "2029-05-31",
        "--min-alt",
        "30",
        "--sun-alt",
        "-12",
    ];
    let with = |cmd: &str, extra: &[&str]| -> Vec<String> {
        let mut a = vec![cmd.to_string()];
        a.extend(common.iter().map(|s| s.to_string()));
        a.extend(extra.iter().map(|s| s.to_string()));
        a
    };
    let run = |a: Vec<String>| -> String {
        let a: Vec<&str> = a.iter().map(|s| s.as_str()).collect();
        let (code, out, err) = rung(&a);
        assert_eq!(code, 0, "{err}");
        out
    };
    let px: serde_json::Value =
        serde_json::from_str(&run(with("parallax", &["--target", "LPO-P03", "--json"]))).unwrap();
    let px_text = run(with("parallax", &["--target", "LPO-P03"]));
    let bu: serde_json::Value = serde_json::from_str(&run(with("budget", &["--json"]))).unwrap();
    let bu_text = run(with("budget", &[]));

    let plx = px["parallax_mas"].as_f64().unwrap();
    let fit = px["sigma_parallax_mas"].as_f64().unwrap();
    let bias = px["dcr_bias_mas"].as_f64().unwrap().abs();
    let abs = px["absolute_correction_mas"].as_f64().unwrap();
    let total = px["sigma_parallax_total_mas"].as_f64().unwrap();
    assert!(bias > 0.0 && abs > 0.0, "{bias} {abs}");
    // rung parallax, text: the same numbers as its JSON, in mas and as terms of σd/d.
    let line = format!(
        "σ_ϖ = {fit:.2} mas (fit), DCR bias bound {bias:.2} mas, relative-to-absolute correction {abs:.2} mas: {total:.2} mas in all"
    );
    assert!(px_text.contains(&line), "{line}\n{px_text}");
    let terms = px["error_terms"].as_array().unwrap();
    let term = |name: &str| -> f64 {
        terms
            .iter()
            .find(|t| t["name"] == name)
            .unwrap_or_else(|| panic!("no term {name}: {terms:?}"))["distance_pct"]
            .as_f64()
            .unwrap()
    };
    let (p_fit, p_dcr, p_abs) = (
        term("parallax fit"),
        term("DCR bias bound"),
        term("relative-to-absolute correction"),
    );
    assert!((p_fit - 100.0 * fit / plx).abs() < 1e-9);
    assert!((p_dcr - 100.0 * bias / plx).abs() < 1e-9);
    assert!((p_abs - 100.0 * abs / plx).abs() < 1e-9);
    let pct_terms = format!(
        "parallax fit {p_fit:.2} %, DCR bias bound {p_dcr:.2} %, relative-to-absolute correction {p_abs:.2} %"
    );
    assert!(
        px_text.contains(&format!(
            "σ_d/d = {:.2} % ({pct_terms})",
            px["distance_precision_pct"].as_f64().unwrap()
        )),
        "{px_text}"
    );
    // rung budget, JSON: the row's terms are the method's.
    let row = &bu["rows"][0];
    assert_eq!(row["target"], "LPO-P03");
    assert_eq!(row["error_terms"], px["error_terms"]);
    assert_eq!(row["achievable_pct"], px["distance_precision_pct"]);
    // rung budget, text: the same terms, named.
    assert!(
        bu_text.contains(&format!("LPO-P03: {pct_terms}")),
        "{pct_terms}\n{bu_text}"
    );
}
