//! A calibrator's host distance in `rung chase` (#17 item 5): a transient
//! whose `host` names a field takes that field's planned distance modulus
//! and its error from the computation the ladder plans its calibrators with
//! (`ladder::chain::host_distance`), so `rung chase` and `rung ladder` give
//! the same calibration; `--host-mu` (or `host_mu_mag` on the row) is an
//! override and says so; a host that does not exist or has no distance is
//! refused with file, line and field. The programme is the invented ladder
//! programme of tests/ladder_support/ (not the demo).

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

struct Rng(u64);
impl Rng {
    // SplitMix64 (Steele, Lea & Flood 2014) with Box–Muller (Box & Muller 1958).
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn gauss(&mut self) -> f64 {
        let u = |r: &mut Rng| ((r.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let (u1, u2) = (u(self), u(self));
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
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
    assert!(
        (h0 - 70.0).abs() < 0.1,
        "{h0}: planned values on the H0 = 70 scale"
    );
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
