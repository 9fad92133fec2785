//! The night table (`plan::night_table`): the row `rung night` prints and the
//! UI shows. Its Moon distance and sky brightness at the best time are the
//! photometry model's at that instant through the full SOFA chain (the
//! exposure calculator's own path, `Photometer::sky` on `Context::exact`), and
//! `rung night --json` carries the same numbers.

use rung::astro::frames::Context;
use rung::astro::night::{Limits, Night};
use rung::plan::night_table;
use rung::sky::BandSet;
use serde_json::Value;
use std::path::Path;
use std::process::Command;

const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo/targets.csv");

#[test]
fn rows_match_the_photometry_model_and_the_command() {
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let date = "2026-12-01".parse().unwrap();
    let limits = Limits::new(30.0, -12.0).unwrap();
    let targets = rung::io::targets::load(Path::new(DEMO)).unwrap().targets;
    let night = Night::new(&site, date).unwrap();
    let places: Vec<_> = targets.iter().map(|t| t.place()).collect();
    let rows = night_table::rows(&night, &places, &limits);
    let bands = BandSet::builtin().unwrap();
    let em = rung::photometry::Photometer::demo(&site).unwrap();
    let mut compared = 0;
    for ((t, p), r) in targets.iter().zip(&places).zip(&rows) {
        let Some(at) = r.night.max_altitude_time else {
            continue;
        };
        let exact = Context::exact(&site, at).unwrap();
        let o = exact.observe(p);
        let moon = o.separation_rad(&exact.moon()).to_degrees();
        assert!(
            (r.moon_separation_deg.unwrap() - moon).abs() < 1e-4,
            "{}: Moon {:?} vs {moon}",
            t.name,
            r.moon_separation_deg
        );
        if o.alt_rad <= 0.0 {
            assert!(r.sky_brightness(&bands, &t.band).is_none());
            continue;
        }
        let want = em.sky(&t.band, &exact, p).unwrap().sky_mag_arcsec2;
        let got = r
            .sky_brightness(&bands, &t.band)
            .unwrap()
            .unwrap()
            .sky_mag_arcsec2;
        assert!((got - want).abs() < 1e-3, "{}: sky {got} vs {want}", t.name);
        compared += 1;
    }
    assert!(compared >= 15, "{compared} targets compared");

    // The command prints the same rows.
    let cfg = tempfile::tempdir().unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(["night", "--site", "pampa-lucero", "--date", "2026-12-01"])
        .args([
            "--targets",
            DEMO,
            "--min-alt",
            "30",
            "--sun-alt",
            "-12",
            "--json",
        ])
        .env("XDG_CONFIG_HOME", cfg.path())
        .env("HOME", cfg.path())
        .env("RUNG_CONFIG_DIR", cfg.path())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let list = v["targets"].as_array().unwrap();
    assert_eq!(list.len(), rows.len());
    for ((t, r), j) in targets.iter().zip(&rows).zip(list) {
        assert_eq!(j["name"], t.name.as_str());
        // JSON numbers read back to within an ulp or two.
        let same = |a: Option<f64>, b: Option<f64>| match (a, b) {
            (Some(a), Some(b)) => (a - b).abs() < 1e-9,
            (a, b) => a == b,
        };
        assert!(same(
            j["moon_separation_deg"].as_f64(),
            r.moon_separation_deg
        ));
        let sky = r
            .sky_brightness(&bands, &t.band)
            .and_then(|x| x.ok())
            .map(|x| x.sky_mag_arcsec2);
        assert!(same(j["sky_mag_arcsec2"].as_f64(), sky), "{}", t.name);
        assert_eq!(
            j["max_altitude_time"].as_str().map(str::to_string),
            r.night.max_altitude_time.map(|t| t.iso())
        );
    }
}
