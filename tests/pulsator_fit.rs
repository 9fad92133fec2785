//! The Fourier-fit mean-magnitude error against a Monte-Carlo estimate made
//! here (fixed seed), and the distance modulus against a hand calculation with
//! the cited Leavitt-law coefficients.

use rung::ladder::pulsator::{
    PulsatorClass, PulsatorConfig, distance_budget, distance_modulus, fourier_fit, mean_mag_sigma,
    mean_mag_sigma_rule, sigma_mag_from_snr,
};

/// A 64-bit linear congruential generator (Knuth's MMIX constants) with
/// Box–Muller normal deviates: small, deterministic, enough for these checks.
struct Lcg(u64);
impl Lcg {
    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let u1 = self.uniform();
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// An invented Cepheid-like light curve (three harmonics, V ≈ 11.2, 0.7 mag
/// peak to peak), exactly representable with K = 3.
fn light_curve(phase: f64) -> f64 {
    let x = 2.0 * std::f64::consts::PI * phase;
    11.2 + 0.30 * x.cos() + 0.08 * (2.0 * x + 1.0).cos() + 0.03 * (3.0 * x).sin()
}

struct Mc {
    sd_mean: f64,
    rms_curve: f64,
}

fn monte_carlo(phases: &[f64], sigma: f64, k: usize, trials: usize, seed: u64) -> Mc {
    let mut rng = Lcg(seed);
    let sig = vec![sigma; phases.len()];
    let grid: Vec<f64> = (0..100).map(|i| i as f64 / 100.0).collect();
    let (mut s1, mut s2, mut curve2) = (0.0, 0.0, 0.0);
    for _ in 0..trials {
        let mags: Vec<f64> = phases
            .iter()
            .map(|p| light_curve(*p) + sigma * rng.normal())
            .collect();
        let f = fourier_fit(phases, &mags, &sig, k).unwrap();
        let d = f.mean_mag() - 11.2;
        s1 += d;
        s2 += d * d;
        curve2 += grid
            .iter()
            .map(|p| (f.at(*p) - light_curve(*p)).powi(2))
            .sum::<f64>()
            / grid.len() as f64;
    }
    let n = trials as f64;
    Mc {
        sd_mean: (s2 / n - (s1 / n).powi(2)).sqrt(),
        rms_curve: (curve2 / n).sqrt(),
    }
}

#[test]
fn mean_magnitude_error_matches_monte_carlo() {
    // Monte Carlo (this test, seed fixed): 4000 noisy light curves, each fitted.
    // The standard deviation of a standard deviation from 4000 trials is
    // 1/√8000 ≈ 1.1 %, so 5 % is a tolerance that cannot pass by luck.
    let k = 3;
    let sigma = sigma_mag_from_snr(50.0); // 0.0217 mag
    assert!((sigma - 0.021_715).abs() < 1e-5);

    // (1) 20 points evenly spread in phase (one per bin of 0.05).
    let even: Vec<f64> = (0..20).map(|i| (i as f64 + 0.5) / 20.0).collect();
    let mc = monte_carlo(&even, sigma, k, 4000, 12345);
    let cov = mean_mag_sigma(&even, &[sigma; 20], k).unwrap();
    // The fit's covariance for A0 is σ/√N when phases are evenly spread.
    assert!((cov - sigma / 20f64.sqrt()).abs() < 1e-9);
    assert!(
        (mc.sd_mean / cov - 1.0).abs() < 0.05,
        "MC {} vs covariance {}",
        mc.sd_mean,
        cov
    );
    // SCIENCE.md's rule σ √((2K+1)/N) is the phase-averaged error of the fitted
    // curve, which the Monte Carlo reproduces; for the mean alone it is larger
    // by √(2K+1) = √7 here (conservative).
    let rule = mean_mag_sigma_rule(sigma, 20, k);
    assert!(
        (mc.rms_curve / rule - 1.0).abs() < 0.05,
        "MC curve {} vs rule {}",
        mc.rms_curve,
        rule
    );
    assert!((rule / cov - 7f64.sqrt()).abs() < 1e-9);

    // (2) 15 points at uneven phases (drawn once with the generator, a gap left
    // between 0.55 and 0.8): the covariance still follows the Monte Carlo, and is
    // larger than σ/√N.
    let mut rng = Lcg(777);
    let uneven: Vec<f64> = (0..15)
        .map(|_| {
            let u = rng.uniform() * 0.75;
            if u < 0.55 { u } else { u + 0.25 }
        })
        .collect();
    let mc = monte_carlo(&uneven, sigma, k, 4000, 999);
    let cov = mean_mag_sigma(&uneven, &[sigma; 15], k).unwrap();
    assert!(
        (mc.sd_mean / cov - 1.0).abs() < 0.05,
        "MC {} vs covariance {}",
        mc.sd_mean,
        cov
    );
    assert!(cov > sigma / 15f64.sqrt());
}

#[test]
fn fit_recovers_a_noiseless_curve_and_refuses_too_few_points() {
    let ph: Vec<f64> = (0..9).map(|i| i as f64 / 9.0 + 0.01).collect();
    let m: Vec<f64> = ph.iter().map(|p| light_curve(*p)).collect();
    let f = fourier_fit(&ph, &m, &[0.01; 9], 3).unwrap();
    assert!((f.mean_mag() - 11.2).abs() < 1e-9);
    assert!((f.coeffs[1] - 0.30).abs() < 1e-9);
    assert!(f.chi2 < 1e-12);
    // 2K + 1 = 7 coefficients need at least 7 points.
    let e = fourier_fit(&ph[..6], &m[..6], &[0.01; 6], 3)
        .unwrap_err()
        .to_string();
    assert!(e.contains("at least 7"), "{e}");
    // All points at one phase cannot fix the harmonics.
    let same = vec![0.3; 9];
    let e = mean_mag_sigma(&same, &[0.01; 9], 3)
        .unwrap_err()
        .to_string();
    assert!(e.contains("bunched"), "{e}");
    let e = fourier_fit(&ph, &m, &[f64::NAN; 9], 3)
        .unwrap_err()
        .to_string();
    assert!(e.contains("errors positive"), "{e}");
}

#[test]
fn distance_modulus_by_hand_with_cited_coefficients() {
    // Leavitt law, V band: M_V = −2.43 (log P − 1) − 4.05 (Benedict et al. 2007,
    // AJ 133, 1810; quoted from memory), as in config/pulsator.toml, with the
    // Cepheid metallicity term γ = −0.2 ± 0.1 mag/dex at [Fe/H] = 0.
    let cfg = PulsatorConfig::builtin();
    let v = cfg
        .star_relation(
            Some(PulsatorClass::Cepheid),
            "V",
            10.0,
            Some(0.0),
            Some(0.1),
        )
        .unwrap();
    assert_eq!(
        (v.relation.slope, v.relation.zero_point_mag),
        (-2.43, -4.05)
    );
    // By hand: P = 10 d → log P − 1 = 0, M = −4.05; m̄ = 12.00, A_V = 0.30:
    // μ = 12.00 + 4.05 − 0.30 = 15.75; d = 10^(15.75/5 + 1) = 10^4.15 = 14 125 pc.
    assert!((v.abs_mag(10.0) + 4.05).abs() < 1e-12);
    let mu = distance_modulus(12.0, 10.0, 0.30, &v);
    assert!((mu - 15.75).abs() < 1e-12);
    // By hand: P = 10^1.5 d = 31.62 d → M = −2.43 × 0.5 − 4.05 = −5.265;
    // with m̄ = 12, A = 0: μ = 17.265.
    assert!((distance_modulus(12.0, 10f64.powf(1.5), 0.0, &v) - 17.265).abs() < 1e-12);
    // By hand: P = 5 d → log P − 1 = −0.30103, M = 0.731503 − 4.05 = −3.318497.
    assert!((v.abs_mag(5.0) + 3.318_497).abs() < 1e-6);
    // [Fe/H] = −0.5: M = −4.05 + (−0.2)(−0.5) = −3.95 at 10 d.
    let poor = cfg
        .star_relation(
            Some(PulsatorClass::Cepheid),
            "V",
            10.0,
            Some(-0.5),
            Some(0.1),
        )
        .unwrap();
    assert!((poor.abs_mag(10.0) + 3.95).abs() < 1e-12);

    // Budget by hand at P = 10 d with σ_m̄ = 0.01 mag and σ_A = 0.1 × 0.30 = 0.03:
    // scatter 0.21, zero point 0.02 (config) → σ_PL² = 0.0445; metallicity
    // |γ| σ[Fe/H] = 0.2 × 0.1 = 0.02;
    // σ_μ² = 0.0445 + 0.0004 + 0.0001 + 0.0009 = 0.0459, σ_μ = 0.214243;
    // σ_d/d = (ln 10/5) σ_μ = 0.460517 × 0.214243 = 9.8663 %.
    let b = distance_budget(12.0, 10.0, 0.30, 0.01, &v, 0.1, 0.0);
    assert!(
        (b.distance_pc - 14_125.375).abs() < 0.01,
        "{}",
        b.distance_pc
    );
    assert!((b.sigma_pl_mag - 0.0445f64.sqrt()).abs() < 1e-12);
    assert!((b.sigma_feh_mag - 0.02).abs() < 1e-12);
    assert!((b.sigma_mu_mag - 0.0459f64.sqrt()).abs() < 1e-9);
    assert!((b.distance_precision_pct - 9.8663).abs() < 1e-3);
    // The floor (σ_m̄ → 0): 0.460517 × √(0.0445 + 0.0004 + 0.0009) = 9.8555 %.
    assert!((b.floor_pct - 9.8555).abs() < 1e-3);
    // With a calibration floor of 0.01 mag, its own term:
    // σ_μ² = 0.0459 + 0.0001 = 0.0460; the floor √(0.0449 + 0.0009 + 0.0001) = √0.0459
    let c = distance_budget(12.0, 10.0, 0.30, 0.01, &v, 0.1, 0.01);
    assert!((c.sigma_mu_mag - 0.046f64.sqrt()).abs() < 1e-9);
    assert!((c.floor_pct - 100.0 * 0.460517 * 0.0459f64.sqrt()).abs() < 1e-3);
    let t = c.error_terms();
    let cal = t.iter().find(|x| x.name == "calibration").unwrap();
    assert_eq!(cal.sigma_mag, 0.01);
}
