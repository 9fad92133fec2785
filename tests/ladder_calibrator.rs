//! A calibrator's host distance in `rung chase` (#17 item 5): a transient
//! whose `host` names a field takes that field's planned distance modulus
//! and its error from the computation the ladder plans its calibrators with
//! (`ladder::chain::host_distance`), so `rung chase` and `rung ladder` give
//! the same calibration; `--host-mu` (or `host_mu_mag` on the row) is an
//! override and says so; a host that does not exist or has no distance is
//! refused with file, line and field. The programme is the invented ladder
//! programme of tests/ladder_support/ (not the demo).

mod rng_support;

use rng_support::Rng;
use rung::io::targets::load;
use rung::ladder::chain::{build, calibrators_of, host_distance};
use rung::programme::{Request, Settings};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

const NOW: &str = "2026-12-01T18:00:00Z";

fn file() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/ladder_support/programme.csv")
}

fn rung(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .env("RUNG_NOW", NOW)
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

/// A copy of the ladder programme with `edit` applied to its text, in a
/// temporary folder with its settings file.
fn edited(dir: &Path, edit: impl Fn(String) -> String) -> PathBuf {
    let text = edit(std::fs::read_to_string(file()).unwrap());
    let f = dir.join("programme.csv");
    std::fs::write(&f, text).unwrap();
    std::fs::copy(
        file().with_file_name("programme.settings.toml"),
        dir.join("programme.settings.toml"),
    )
    .unwrap();
    f
}

fn line_of(f: &Path, name: &str) -> usize {
    1 + std::fs::read_to_string(f)
        .unwrap()
        .lines()
        .position(|l| l.starts_with(&format!("{name},")))
        .unwrap()
}

fn close(a: &Value, b: &Value, what: &str) {
    let (x, y) = (a.as_f64().unwrap(), b.as_f64().unwrap());
    assert!((x - y).abs() < 1e-9, "{what}: chase {x} vs ladder {y}");
}

#[test]
fn chase_and_ladder_give_one_calibration_from_the_host_field() {
    let f = file();
    let fs = f.to_str().unwrap();
    let c = json(&["chase", "--targets", fs, "--target", "LPO-S2019a", "--json"]);
    let l = json(&["ladder", "--targets", fs, "--json"]);
    let lc = l["calibrators"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["target"] == "LPO-S2019a")
        .expect("the ladder's calibrator row");
    let cc = &c["calibration"];
    assert_eq!(c["role"], "calibrator");
    assert_eq!(cc["host"], "LPO-G1");
    assert_eq!(cc["host_overridden"], false);
    for k in [
        "host_mu_mag",
        "host_mu_err_mag",
        "peak_abs_mag",
        "sigma_mag",
        "sigma_host_mag",
        "sigma_own_mag",
    ] {
        close(&cc[k], &lc[k], k);
    }
    assert_eq!(cc["host_source"], lc["host_source"]);
    // The host's planned modulus is the field's node in the ladder (its
    // anchors fix the relation's zero point here).
    let node = l["nodes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|n| n["name"] == "LPO-G1")
        .unwrap();
    let (mu, s) = (
        cc["host_mu_mag"].as_f64().unwrap(),
        cc["host_mu_err_mag"].as_f64().unwrap(),
    );
    assert!((mu - node["modulus_mag"].as_f64().unwrap()).abs() < 1e-6);
    assert!((s - node["sigma_mag"].as_f64().unwrap()).abs() < 1e-6);
    // The error split: host and own in quadrature; the own part of a
    // supernova already observed is its given fit and the intrinsic scatter.
    let (h, o, t) = (
        cc["sigma_host_mag"].as_f64().unwrap(),
        cc["sigma_own_mag"].as_f64().unwrap(),
        cc["sigma_mag"].as_f64().unwrap(),
    );
    assert!((h.hypot(o) - t).abs() < 1e-12);
    assert_eq!(h, s);
    assert!(o > 0.05, "{o}: the given fit error (0.05) and the scatter");
    // The text says the host, its modulus and the split.
    let (code, out, err) = rung(&["chase", "--targets", fs, "--target", "LPO-S2019a"]);
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains(&format!("host LPO-G1 at μ {mu:.3} ± {s:.3} mag")),
        "{out}"
    );
    assert!(out.contains(&format!(
        "(host distance {h:.3}, the supernova's own {o:.3}"
    )));
}

#[test]
fn host_distance_is_the_ladders_planned_modulus() {
    let f = file();
    let l = load(&f).unwrap();
    let st = Settings::resolve(
        &Request {
            programme: Some(f.clone()),
            ..Default::default()
        },
        rung::astro::time::parse_instant(NOW).unwrap(),
    )
    .unwrap();
    let cal = l.targets.iter().find(|t| t.name == "LPO-S2019a").unwrap();
    let h = host_distance(&st, &l.targets, Some(&f), cal)
        .unwrap()
        .unwrap();
    let ladder = build(&st, &l.targets, Some(&f)).unwrap();
    let m = &ladder.host_moduli["LPO-G1"];
    assert_eq!((h.modulus_mag, h.sigma_mag), (m.modulus_mag, m.sigma_mag));
    assert!(!h.overridden);
    let row = &calibrators_of(&ladder)[0];
    assert_eq!(row.host_mu_mag, h.modulus_mag);
    // A transient without a host link has none.
    let flow = l.targets.iter().find(|t| t.name == "LPO-T2026d").unwrap();
    assert!(
        host_distance(&st, &l.targets, Some(&f), flow)
            .unwrap()
            .is_none()
    );
}

#[test]
fn a_fresh_calibrator_splits_its_error_and_an_override_says_so() {
    // A supernova found on the rise in a host given by its modulus on the
    // command line: the chase plans it and the calibration follows from its
    // own fit and the host's error.
    let c = json(&[
        "chase",
        "--ra",
        "03:31:21.6",
        "--dec",
        "-28:46:12",
        "--discovered",
        "2026-11-28T06:10:00Z",
        "--mag",
        "15.5",
        "--host-mu",
        "32.0",
        "--host-mu-err",
        "0.08",
        "--now",
        "2026-11-28T12:00:00Z",
        "--json",
    ]);
    let cc = &c["calibration"];
    assert_eq!(c["role"], "calibrator");
    assert_eq!(cc["host_mu_mag"], 32.0);
    assert_eq!(cc["sigma_host_mag"], 0.08);
    assert_eq!(cc["host_overridden"], true);
    let (h, o, t) = (
        cc["sigma_host_mag"].as_f64().unwrap(),
        cc["sigma_own_mag"].as_f64().unwrap(),
        cc["sigma_mag"].as_f64().unwrap(),
    );
    assert!((h.hypot(o) - t).abs() < 1e-12 && o > 0.0);
    // Placed from its host's distance, it calibrates the configured zero point.
    close(&cc["peak_abs_mag"], &c["zero_point"]["abs_mag"], "M_B");
}

#[test]
fn a_host_that_is_missing_or_has_no_distance_names_file_line_and_field() {
    let dir = tempfile::tempdir().unwrap();
    // No such target.
    let f = edited(dir.path(), |t| t.replace(",LPO-G1,0.05", ",LPO-G7,0.05"));
    let (code, _, err) = rung(&[
        "chase",
        "--targets",
        f.to_str().unwrap(),
        "--target",
        "LPO-S2019a",
    ]);
    assert_ne!(code, 0);
    let want = format!(
        "{}, line {}, field 'host': 'LPO-G7' is not a target in this file: a host names a field of the programme",
        f.display(),
        line_of(&f, "LPO-S2019a")
    );
    assert!(err.contains(&want), "{err}");
    // A field none of whose stars counts: no distance.
    let f = edited(dir.path(), |t| {
        t.replace(",LPO-G1,0.05", ",LPO-G9,0.05")
            + "LPO-G9,field,10:41:13.0,-41:03:00,,,,,,,,,,,,,,,,12,2,an empty field (invented),,,,,\n"
    });
    let (code, _, err) = rung(&[
        "chase",
        "--targets",
        f.to_str().unwrap(),
        "--target",
        "LPO-S2019a",
    ]);
    assert_ne!(code, 0);
    let want = format!(
        "{}, line {}, field 'host': 'LPO-G9' has no distance: no star of the field counts",
        f.display(),
        line_of(&f, "LPO-S2019a")
    );
    assert!(err.contains(&want), "{err}");
    // A host that is a supernova.
    let f = edited(dir.path(), |t| {
        t.replace(",LPO-G1,0.05", ",LPO-T2026d,0.05")
    });
    let (code, _, err) = rung(&[
        "chase",
        "--targets",
        f.to_str().unwrap(),
        "--target",
        "LPO-S2019a",
    ]);
    assert_ne!(code, 0);
    assert!(
        err.contains("field 'host': 'LPO-T2026d' is a transient target"),
        "{err}"
    );
}

#[test]
fn a_monte_carlo_over_the_demo_chain_gives_its_stated_h0_error() {
    // The demo's ladder closes from its Cepheids with parallaxes through the
    // host galaxy LPO-G1 and the calibrator LPO-S2024a to the Hubble flow.
    // Its inputs drawn term by term (every observation of the chain), the
    // chain refitted each time: the scatter of H0 (km/s/Mpc, through the
    // exponential, so the draw also sees what the linear propagation
    // leaves out) against the stated σ_H0 of the linear propagation.
    // 400 draws know a standard deviation to about ±3.5 %; tolerance 10 %.
    use rung::ladder::chain::{EndPoint, h0_from_intercept};
    let f = Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    let l = load(&f).unwrap();
    let st = Settings::resolve(
        &Request {
            programme: Some(f.clone()),
            ..Default::default()
        },
        rung::astro::time::parse_instant("2026-12-02T01:00:00Z").unwrap(),
    )
    .unwrap();
    let ladder = build(&st, &l.targets, Some(&f)).unwrap();
    assert!(
        calibrators_of(&ladder)
            .iter()
            .any(|r| r.target == "LPO-S2024a" && r.host == "LPO-G1"),
        "the demo's calibrator in its host galaxy"
    );
    let sol = ladder.chain.solve().unwrap();
    let b = ladder.chain.budget(&sol, &EndPoint::Hubble).unwrap();
    let h0 = h0_from_intercept(b.value_mag);
    let sigma_pct = b.distance_pct;
    // The calibrator's M_B is measured from its given peak; the Hubble-flow
    // values are planned on the H0 = 70 scale with the zero point M_zp, so
    // H0 = 70 × 10^(0.2 (M_B − M_zp)) (by hand: M_B −19.164 from LPO-S2024a's
    // peak 5.600 less A_B 0.100, ΔM 0.123 and μ(LPO-G1) 24.541 (its stars at
    // the field's own [Fe/H], every one with its phases covered by the
    // field's visits); M_zp −19.05: 70 × 10^(−0.0228) = 66.42).
    let cal = calibrators_of(&ladder)
        .into_iter()
        .find(|r| r.target == "LPO-S2024a")
        .unwrap();
    assert!(cal.observed);
    let want = 70.0 * 10f64.powf(0.2 * (cal.peak_abs_mag + 19.05));
    assert!((h0 - want).abs() < 1e-6, "{h0} vs {want}");
    assert!((h0 - 66.42).abs() < 0.05, "{h0}");
    let mut r = Rng(2027);
    let n = 400;
    let (mut s1, mut s2) = (0.0, 0.0);
    for _ in 0..n {
        let mut c = ladder.chain.clone();
        for o in &mut c.observations {
            for t in &o.terms {
                o.value_mag += t.sigma_mag * r.gauss();
            }
        }
        let s = c.solve().unwrap();
        let h = h0_from_intercept(c.budget(&s, &EndPoint::Hubble).unwrap().value_mag);
        s1 += h;
        s2 += h * h;
    }
    let mean = s1 / n as f64;
    let sd_pct = 100.0 * (s2 / n as f64 - mean * mean).sqrt() / h0;
    assert!(
        (sd_pct / sigma_pct - 1.0).abs() < 0.10,
        "Monte Carlo {sd_pct:.2} % vs linear {sigma_pct:.2} %"
    );
    println!("demo H0 {h0:.2}: linear σ {sigma_pct:.2} %, Monte Carlo {sd_pct:.2} % ({n} draws)");
}

#[test]
fn an_observed_calibrator_measures_its_peak_absolute_magnitude() {
    // Worked example, by hand, for LPO-S2019a of the ladder programme
    // (B peak 5.173 given, extinction_mag 0.100 in B, the stretch–colour
    // relation of config/transient.toml: α 0.141, β 3.101, x1 = (Δm15 −
    // 1.09)/(−0.161), c = colour − E(B−V)_MW + 0.057; the chase's planning
    // Δm15 1.1 and colour: intrinsic −0.07 + the planning host E(B−V) 0.05
    // + E(B−V)_MW):
    //   x1 = (1.1 − 1.09)/(−0.161) = −0.062112;  c = −0.07 + 0.05 + 0.057 = 0.037
    //   ΔM = −α x1 + β c = 0.008758 + 0.114737 = 0.123495 mag
    //   m_B,std = 5.173 − 0.100 − 0.123495 = 4.949505 mag
    //   M_B = m_B,std − μ_host (the host's modulus the chain fits)
    //   σ_own = √(0.05² + 0.12² + σ_MW² + σ_K²) = 0.130057: the given fit,
    //   the intrinsic scatter and the terms its chase would carry: the
    //   foreground's, |β − R_B| × 15 % × A_B/R_B with R_B = 4.1 (CCM 1989's
    //   A_B/E(B−V) at R_V = 3.1, quoted from memory; the 15 % of
    //   config/transient.toml), 0.00366 mag; the K-correction not applied,
    //   2.5 log10(1 + z) at z = 0.0012 (Hogg et al. 2002's bandpass term),
    //   0.00130 mag. σ = √(σ_host² + σ_own²).
    let f = file();
    let l = json(&["ladder", "--targets", f.to_str().unwrap(), "--json"]);
    let c = l["calibrators"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["target"] == "LPO-S2019a")
        .unwrap()
        .clone();
    let v = |k: &str| c[k].as_f64().unwrap();
    let sp = &c["standardized_peak"];
    assert_eq!(c["observed"], true);
    assert!((sp["correction_mag"].as_f64().unwrap() - 0.123495).abs() < 5e-6);
    assert!((sp["mw_extinction_b_mag"].as_f64().unwrap() - 0.100).abs() < 1e-9);
    assert!((sp["standardized_peak_mag"].as_f64().unwrap() - 4.949505).abs() < 5e-6);
    let mu = v("host_mu_mag");
    assert!((v("peak_abs_mag") - (4.949505 - mu)).abs() < 5e-6);
    let r_b = 4.1;
    let mw = (3.101f64 - r_b).abs() * 0.15 * 0.100 / r_b;
    let k = 2.5 * (1.0012f64).log10();
    let own = (0.05f64.powi(2) + 0.12f64.powi(2) + mw * mw + k * k).sqrt();
    // (R_B from the extinction law at the template's B wavelength moves
    // σ_own by under 2e-5 mag across 4.0..4.3.)
    assert!(
        (v("sigma_own_mag") - own).abs() < 5e-5,
        "{} vs {own}",
        v("sigma_own_mag")
    );
    assert!(v("sigma_own_mag") > 0.13, "{}", v("sigma_own_mag"));
    assert!((v("sigma_mag") - v("host_mu_err_mag").hypot(v("sigma_own_mag"))).abs() < 1e-12);
    // The peak was written so that M_B is the zero point (−19.05) at the
    // host's fitted distance: the fit returns H0 = 70.
    assert!(
        (v("peak_abs_mag") + 19.05).abs() < 0.002,
        "{}",
        v("peak_abs_mag")
    );
    let text = c["peak_abs_mag_how"].as_str().unwrap();
    assert!(text.starts_with("measured from its given peak"), "{text}");
    assert!(
        l["h0_basis"]
            .as_str()
            .unwrap()
            .starts_with("1 calibrator measured")
    );

    // The same supernova 2.327 mag fainter (peak 7.500): M_B follows its
    // peak one for one, the host's distance does not move, and H0 scales
    // by 10^(0.2 × 2.327) = 2.9205 (h = M_B − (M_zp − 5 log10 70) for
    // Hubble-flow values written on the H0 = 70 scale). Rung says it lies
    // more than 1 mag from the zero point.
    let dir = tempfile::tempdir().unwrap();
    let g = edited(dir.path(), |t| {
        t.replace("2019-03-10T04:20:00Z,5.173,", "2019-03-10T04:20:00Z,7.5,")
    });
    let gs = g.to_str().unwrap();
    let l2 = json(&["ladder", "--targets", gs, "--json"]);
    let c2 = l2["calibrators"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["target"] == "LPO-S2019a")
        .unwrap();
    assert!((c2["host_mu_mag"].as_f64().unwrap() - mu).abs() < 1e-9);
    let dm = c2["peak_abs_mag"].as_f64().unwrap() - v("peak_abs_mag");
    assert!((dm - 2.327).abs() < 1e-9, "{dm}");
    let ratio = l2["h0_km_s_mpc"].as_f64().unwrap() / l["h0_km_s_mpc"].as_f64().unwrap();
    assert!((ratio - 2.9205).abs() < 1e-3, "{ratio}");
    let notes: Vec<&str> = l2["notes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|n| n.as_str().unwrap())
        .collect();
    assert!(
        notes
            .iter()
            .any(|n| n.starts_with("LPO-S2019a: the M_B -16.72 mag")
                && n.contains("by more than 1 mag")),
        "{notes:?}"
    );
    // rung chase gives the same M_B, in JSON and in words.
    let ch = json(&["chase", "--targets", gs, "--target", "LPO-S2019a", "--json"]);
    close(
        &ch["calibration"]["peak_abs_mag"],
        &c2["peak_abs_mag"],
        "M_B",
    );
    assert_eq!(
        ch["calibration"]["peak_abs_mag_how"],
        c2["peak_abs_mag_how"]
    );
    let (code, out, err) = rung(&["chase", "--targets", gs, "--target", "LPO-S2019a"]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("M_B -16.723 ±"), "{out}");
    assert!(
        out.contains(c2["peak_abs_mag_how"].as_str().unwrap()),
        "{out}"
    );
}

#[test]
fn an_observed_calibrator_without_its_peak_is_left_out_with_the_reason() {
    // Its peak's error given, a discovery magnitude but no peak: nothing to
    // measure M_B from (bad-input LD10).
    let dir = tempfile::tempdir().unwrap();
    let g = edited(dir.path(), |t| {
        t.replace(
            "2019-03-10T04:20:00Z,5.173,,",
            "2019-03-10T04:20:00Z,,16.0,",
        )
    });
    let l = json(&["ladder", "--targets", g.to_str().unwrap(), "--json"]);
    let why = left_out_why(&l, "LPO-S2019a");
    assert!(
        why.starts_with("peak_err_mag is given without peak_mag"),
        "{why}"
    );
}

/// Why `rung ladder --json` left `name` off the ladder.
fn left_out_why(l: &Value, name: &str) -> String {
    let r = l["left_out"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r[0] == name)
        .unwrap_or_else(|| panic!("{name} not left out: {}", l["left_out"]));
    r[1].as_str().unwrap().to_string()
}

/// The ladder programme with its Hubble flow cut to LPO-T2026d, observed
/// in 2019 with its light curve fitted: B peak `peak` ± 0.05 mag given
/// (and `mag_now`, a row's other magnitude).
fn observed_flow(dir: &Path, peak: &str, mag_now: &str) -> PathBuf {
    let (peak, mag_now) = (peak.to_string(), mag_now.to_string());
    edited(dir, move |t| {
        t.lines()
            .filter(|l| !["LPO-T2026a,", "LPO-T2026e,", "LPO-T2026f,"].iter().any(|n| l.starts_with(n)))
            .map(|l| {
                if l.starts_with("LPO-T2026d,") {
                    l.replace(
                        "2026-11-27T05:30:00Z,16.8,18.0,0.034,0.05,8,3,HF (invented),,,,,",
                        &format!(
                            "2019-05-01T05:30:00Z,{peak},{mag_now},0.034,0.05,,3,HF observed in 2019 (invented),,,0.05,,"
                        ),
                    )
                } else {
                    l.to_string()
                }
            })
            .collect::<Vec<_>>()
            .join("\n")
    })
}

/// A Hubble-flow supernova already observed (its peak's error given)
/// measures the flow with its fitted peak, as an observed calibrator
/// measures M_B: the ladder used the planned value on the H0 = 70 scale
/// whatever peak was given, so H0 could not move with the Hubble-flow data.
/// With one supernova in the flow the intercept follows it exactly: a peak
/// 0.2 mag fainter puts it 10^0.04 times farther and H0 falls by 10^-0.04
/// (the distance modulus, μ = 5 log10(d/10 pc)). Its own error is the
/// fit's given one (0.05 mag) and the terms its chase carries apart from
/// the fit (`rung chase --json` of the same supernova not yet observed:
/// intrinsic scatter, Milky-Way extinction, the K-correction not applied,
/// its peculiar velocity); the row used to carry only the fit and the
/// intrinsic scatter. The peculiar velocity is checked against the world:
/// σ_v = 300 km/s at z = 0.034, (5/ln 10) (σ_v/cz) (1 + z) (1 + (1 − q0)
/// z/2) with q0 = Ωm/2 − ΩΛ = −0.55 for flat ΛCDM with Ωm = 0.3 (the
/// low-redshift expansion of d_L, common practice; quoted from memory).
#[test]
fn an_observed_hubble_flow_supernova_measures_the_flow_with_its_peak() {
    let dir = tempfile::tempdir().unwrap();
    let run = |peak: &str| {
        let sub = dir.path().join(peak);
        std::fs::create_dir(&sub).unwrap();
        let f = observed_flow(&sub, peak, "");
        json(&["ladder", "--targets", f.to_str().unwrap(), "--json"])
    };
    let (a, b) = (run("16.8"), run("17.0"));
    // The terms its chase carries, fresh (the programme as it ships).
    let chase = json(&[
        "chase",
        "--target",
        "LPO-T2026d",
        "--targets",
        file().to_str().unwrap(),
        "--json",
    ]);
    let terms: Vec<(String, f64, bool)> = chase["error_terms"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| {
            (
                t["name"].as_str().unwrap().to_string(),
                t["sigma_mag"].as_f64().unwrap(),
                t["shared"].as_bool().unwrap(),
            )
        })
        .collect();
    let term = |name: &str| {
        terms
            .iter()
            .find(|t| t.0 == name)
            .unwrap_or_else(|| panic!("no {name} in {terms:?}"))
            .1
    };
    let (z, c) = (0.034, 299_792.458);
    let q0 = 0.3 / 2.0 - 0.7;
    let pec =
        5.0 / std::f64::consts::LN_10 * 300.0 / (c * z) * (1.0 + z) * (1.0 + (1.0 - q0) * z / 2.0);
    assert!(
        (term("peculiar velocity") / pec - 1.0).abs() < 0.02,
        "{} vs {pec}",
        term("peculiar velocity")
    );
    let rest: f64 = terms
        .iter()
        .filter(|t| !t.2 && t.0 != "light-curve fit")
        .map(|t| t.1 * t.1)
        .sum();
    assert!(term("K-correction (not applied)") > 0.0 && term("Milky-Way extinction") > 0.0);
    let h0 = |l: &Value| l["h0_km_s_mpc"].as_f64().unwrap();
    let ratio = h0(&b) / h0(&a);
    assert!(
        (ratio - 10f64.powf(-0.04)).abs() < 1e-9,
        "{ratio} ({} → {})",
        h0(&a),
        h0(&b)
    );
    for l in [&a, &b] {
        assert!(
            l["h0_basis"]
                .as_str()
                .unwrap()
                .contains("1 Hubble-flow supernova measured from its given peak"),
            "{}",
            l["h0_basis"]
        );
        let row = l["supernovae"]
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r["name"] == "LPO-T2026d")
            .expect("on the ladder");
        let own = row["own_sigma_mag"].as_f64().unwrap();
        let want = (0.05f64.powi(2) + rest).sqrt();
        assert!((own - want).abs() < 1e-9, "own σ {own} vs {want}");
    }
    // Its peak's error without the peak (a magnitude seen once instead):
    // nothing to measure, left out with the reason.
    let sub = dir.path().join("none");
    std::fs::create_dir(&sub).unwrap();
    let f = observed_flow(&sub, "", "16.0");
    let l = json(&["ladder", "--targets", f.to_str().unwrap(), "--json"]);
    let why = left_out_why(&l, "LPO-T2026d");
    assert!(
        why.starts_with("peak_err_mag is given without peak_mag"),
        "{why}"
    );
}
