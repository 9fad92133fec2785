//! Mean magnitudes (#16 item 4; docs/science.md, Pulsating stars): the
//! intensity mean of a light curve and its error, light-curve templates for
//! few epochs where they are published practice (near-infrared), and the
//! photometric calibration floor per band as its own term of the budget.

use rung::ladder::pulsator::{
    PulsatorClass, PulsatorConfig, intensity_mean_gradient, intensity_mean_of,
    intensity_mean_sigma, mean_mag_sigma, sinusoid_model, template_mean_sigma,
};
use std::process::Command;

/// I0(x) = Σ (x/2)^(2k) / (k!)², the modified Bessel function (its series;
/// Abramowitz & Stegun 9.6.10).
fn bessel_i0(x: f64) -> f64 {
    let (mut term, mut sum) = (1.0, 1.0);
    for k in 1..40 {
        term *= (x / 2.0).powi(2) / (k as f64).powi(2);
        sum += term;
    }
    sum
}

#[test]
fn the_intensity_mean_of_a_sinusoid_is_brighter_by_the_bessel_factor() {
    // m(φ) = m0 − a cos 2πφ: ⟨10^(−0.4 m)⟩ = 10^(−0.4 m0) I0(0.4 ln10 a), so
    // ⟨m⟩_I = m0 − 2.5 log10 I0(0.921 a) (a mathematical identity).
    for (m0, pp) in [(12.0, 0.2), (14.3, 0.8), (9.5, 1.6)] {
        let c = sinusoid_model(m0, pp, 3);
        let want = m0 - 2.5 * bessel_i0(0.4 * 10f64.ln() * pp / 2.0).log10();
        let got = intensity_mean_of(&c);
        assert!((got - want).abs() < 1e-10, "{pp}: {got} vs {want}");
    }
    // A 0.8-mag (peak to peak) Cepheid: the magnitude mean is 0.03653 mag
    // fainter than the intensity mean (scipy.special.i0(0.36841) = 1.034221).
    let d = intensity_mean_of(&sinusoid_model(0.0, 0.8, 1));
    assert!((d + 0.036_533).abs() < 1e-6, "{d}");
    // The gradient weighs the bright phases: its A0 part is 1 exactly, and
    // the cos 2πφ term (bright at φ = 0, where cos = 1) counts positively,
    // ⟨w cos⟩/⟨w⟩ = I1(x)/I0(x) = 0.18115 for x = 0.36841 (scipy.special).
    let g = intensity_mean_gradient(&sinusoid_model(12.0, 0.8, 2));
    assert!((g[0] - 1.0).abs() < 1e-12, "{g:?}");
    assert!((g[1] - 0.181_15).abs() < 1e-4, "{g:?}");
}

#[test]
fn the_intensity_mean_error_matches_the_magnitude_mean_for_a_constant_star() {
    let phases: Vec<f64> = (0..10).map(|i| i as f64 / 10.0 + 0.03).collect();
    let sig = vec![0.01; 10];
    let a0 = mean_mag_sigma(&phases, &sig, 3).unwrap();
    let flat = intensity_mean_sigma(&phases, &sig, 3, &sinusoid_model(12.0, 0.0, 3)).unwrap();
    assert!((flat - a0).abs() < 1e-12, "{flat} {a0}");
    // A large amplitude moves weight to the bright half: a different error.
    let big = intensity_mean_sigma(&phases, &sig, 3, &sinusoid_model(12.0, 1.2, 3)).unwrap();
    assert!((big - a0).abs() > 1e-5, "{big} {a0}");
}

#[test]
fn templates_and_floors_carry_their_published_sources() {
    let cfg = PulsatorConfig::builtin();
    // Inno et al. 2015, A&A 576, A30 (abstract, checked): 0.015–0.019 mag.
    let t = cfg.template_for(PulsatorClass::Cepheid, "K").unwrap();
    assert_eq!(t.epoch_sigma_mag, 0.019);
    assert!(t.source.contains("Inno et al. 2015, A&A 576, A30"));
    // Braga et al. 2019, A&A 625, A1 (abstract, checked): σ = 0.04 mag.
    let t = cfg.template_for(PulsatorClass::RrLyrae, "J").unwrap();
    assert_eq!(t.epoch_sigma_mag, 0.04);
    assert!(t.source.contains("Braga et al. 2019, A&A 625, A1"));
    // Optical mean magnitudes come from full light curves: no V template.
    assert!(cfg.template_for(PulsatorClass::Cepheid, "V").is_none());
    // Floors (common practice, config/pulsator.toml): V 0.01, K 0.02.
    let v = cfg.relation(PulsatorClass::Cepheid, "V").unwrap();
    let k = cfg.relation(PulsatorClass::Cepheid, "K").unwrap();
    assert_eq!(cfg.calibration_floor(&v), 0.01);
    assert_eq!(cfg.calibration_floor(&k), 0.02);
    // W = I − 1.54 (V − I): √(2.54² 0.015² + 1.54² 0.01²) = 0.041095 (by hand).
    let w = cfg.relation(PulsatorClass::Cepheid, "W_VI").unwrap();
    assert!(
        (cfg.calibration_floor(&w) - 0.041_095).abs() < 1e-6,
        "{}",
        cfg.calibration_floor(&w)
    );
}

#[test]
fn a_template_mean_from_few_epochs_by_hand() {
    // One epoch at 0.01 mag through a 0.019-mag template: √(0.01² + 0.019²).
    let one = template_mean_sigma(&[0.01], 0.019).unwrap();
    assert!((one - 0.021_471).abs() < 1e-6, "{one}");
    // Four such epochs: half of it.
    let four = template_mean_sigma(&[0.01; 4], 0.019).unwrap();
    assert!((four - one / 2.0).abs() < 1e-12);
    assert!(template_mean_sigma(&[], 0.02).is_err());
}

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

/// The demo Cepheid in K on the near-infrared camera: its goal is met with
/// fewer epochs through the template than a Fourier fit needs, and the
/// calibration floor is its own term in the budget; in V the Fourier fit.
#[test]
fn the_goal_plan_in_k_uses_the_template_and_shows_the_calibration_term() {
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
        "--json",
    ];
    let mut a = base.to_vec();
    a.extend([
        "--goal-pct",
        "6",
        "--band",
        "K",
        "--mean-mag",
        "11.5",
        "--instrument",
        "lucero-1m-ir",
    ]);
    let (code, out, err) = rung(&a);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["mean_from"], "template", "{}", v["notes"]);
    let n = v["visits"].as_array().unwrap().len();
    assert!((1..10).contains(&n), "{n} visits");
    assert!(v["distance_precision_pct"].as_f64().unwrap() <= 6.0);
    assert_eq!(v["sigma_cal_mag"], 0.02);
    let terms = v["error_terms"].as_array().unwrap();
    let cal = terms
        .iter()
        .find(|t| t["name"] == "calibration")
        .expect("calibration term");
    assert_eq!(cal["sigma_mag"], 0.02);
    // The terms add in quadrature to σ_μ.
    let s2: f64 = terms
        .iter()
        .map(|t| t["sigma_mag"].as_f64().unwrap().powi(2))
        .sum();
    assert!((s2.sqrt() - v["sigma_mu_mag"].as_f64().unwrap()).abs() < 1e-9);
    let mut a = base.to_vec();
    a.extend(["--goal-pct", "12"]);
    let (code, out, err) = rung(&a);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["mean_from"], "fourier");
    assert_eq!(v["sigma_cal_mag"], 0.01);
    assert!(v["mean"]["intensity_minus_magnitude_mag"].as_f64().unwrap() < 0.0);
}
