//! Published relations of the transient method, as configured, checked by hand.

mod transient_support;

use rung::ladder::transient::{
    TransientConfig, fractional_distance_error, hubble_distance_modulus, peculiar_sigma_mu,
};
use transient_support::cfg;

#[test]
fn standardization_at_reference_decline_and_its_slope() {
    // Phillips et al. (1999, AJ 118, 1766), quoted from memory: M_B,max at
    // Δm15(B) = 1.1 is about −19.3 on an H0 ≈ 70 scale (−19.26 on their H0 = 65
    // scale, i.e. −19.26 − 5 log10(70/65) = −19.42 — so anything within
    // −19.5..−19.1 is consistent with the published zero point), and the slope
    // is 0.784 ± 0.18 (Phillips 1993 found a steeper 2.7 from a small sample).
    let s = cfg().standardization;
    let m11 = s.peak_abs_mag(1.1);
    assert!((-19.5..=-19.1).contains(&m11), "M_B(Δm15=1.1) = {m11}");
    assert_eq!(m11, s.m0_mag, "the zero point is the value at Δm15 = 1.1");
    assert!((0.6..=0.95).contains(&s.slope_b), "slope {}", s.slope_b);
    // A decline 0.5 mag faster: 0.5 b fainter.
    let m16 = s.peak_abs_mag(1.6);
    assert!((m16 - m11 - 0.5 * s.slope_b).abs() < 1e-12);
    assert!(m16 > m11, "faster decliners are fainter (Phillips 1993)");
    // Intrinsic scatter after standardization about 0.12-0.15 mag (from memory).
    assert!((0.10..=0.16).contains(&s.sigma_int_mag));
}

#[test]
fn hubble_law_distance_modulus_at_z_001() {
    // Hand calculation for z = 0.01 and the configured H0 (70 km/s/Mpc):
    //   cz = 299 792.458 km/s × 0.01 = 2997.92458 km/s
    //   d  = cz / H0 = 2997.92458 / 70 = 42.82749 Mpc = 4.282749e7 pc
    //   μ  = 5 log10(d / 10 pc) = 5 log10(4.282749e6) = 5 × 6.631722 = 33.1586
    // ("about 33.2 for H0 = 70").
    let c = cfg();
    assert_eq!(
        c.cosmology.h0_km_s_mpc, 70.0,
        "the hand calculation assumes H0 = 70"
    );
    let mu = hubble_distance_modulus(0.01, c.cosmology.h0_km_s_mpc).unwrap();
    assert!((mu - 33.1586).abs() < 5e-4, "μ = {mu}");
    assert!((mu - 33.2).abs() < 0.05);
    // Doubling the redshift adds 5 log10 2 = 1.5051 mag.
    let mu2 = hubble_distance_modulus(0.02, 70.0).unwrap();
    assert!((mu2 - mu - 1.50515).abs() < 1e-4);
    // No distance for z ≤ 0.
    assert!(hubble_distance_modulus(0.0, 70.0).is_err());
    assert!(hubble_distance_modulus(-0.01, 70.0).is_err());
}

#[test]
fn peculiar_velocity_term_and_distance_error() {
    // σ_μ = (5/ln 10) σ_v / (cz): at z = 0.01, σ_v = 300 km/s,
    //   2.171472 × 300 / 2997.92458 = 0.21730 mag,
    // and σ_d/d = (ln 10/5) σ_μ = σ_v / (cz) = 0.10007 (the Hubble law's own
    // first-order error; an identity).
    let s = peculiar_sigma_mu(0.01, 300.0);
    assert!((s - 0.21730).abs() < 5e-5, "σ_μ = {s}");
    assert!((fractional_distance_error(s) - 300.0 / 2997.92458).abs() < 1e-12);
    // (ln 10)/5 = 0.460517 (SCIENCE.md: ≈ 0.461).
    assert!((fractional_distance_error(1.0) - 0.460517).abs() < 1e-6);
    // The configured dispersion is the usual 300 km/s (quoted from memory).
    assert_eq!(cfg().cosmology.sigma_v_km_s, 300.0);
}

#[test]
fn template_meets_its_definition() {
    // The template is the project's own approximation; these are its defining
    // properties: zero at maximum, exactly Δm15 below peak 15 rest-frame days
    // later, no light before explosion, a rise of 18-20 d (Riess et al. 1999,
    // quoted from memory), and a tail that keeps fading slowly.
    let tp = cfg().template;
    assert!((18.0..=20.0).contains(&tp.rise_days));
    for dm15 in [0.8, 1.1, 1.5, 1.9] {
        assert!(tp.delta_mag(0.0, dm15).unwrap().abs() < 1e-12);
        assert!((tp.delta_mag(15.0, dm15).unwrap() - dm15).abs() < 1e-9);
        let a = tp.delta_mag(60.0, dm15).unwrap();
        let b = tp.delta_mag(70.0, dm15).unwrap();
        assert!((b - a - 10.0 * tp.tail_slope_mag_per_day).abs() < 0.01);
    }
    assert!(tp.delta_mag(-tp.rise_days - 0.1, 1.1).is_none());
    // Symmetric near the peak: both branches have zero slope there.
    let e = 1e-3;
    assert!(tp.delta_mag(e, 1.1).unwrap() < 1e-5);
    assert!(tp.delta_mag(-e, 1.1).unwrap() < 1e-5);
    // Rise phase inverts the rise branch.
    let ph = tp.rise_phase_for(1.5).unwrap();
    assert!((tp.delta_mag(ph, 1.1).unwrap() - 1.5).abs() < 1e-5);
    // Faster decline, faster fall in the first 15 days (no impossible rates).
    assert!(tp.decline_scale_days(1.6).unwrap() < tp.decline_scale_days(1.0).unwrap());
    assert!(tp.decline_scale_days(3.0).is_none());
}

#[test]
fn bad_config_names_file_and_field() {
    let text =
        rung::ladder::transient::DEFAULT_CONFIG_TOML.replace("slope_b = 0.78", "slope_b = -1");
    let e = TransientConfig::parse(&text, std::path::Path::new("my.toml")).unwrap_err();
    let m = e.to_string();
    assert!(m.contains("my.toml") && m.contains("slope_b"), "{m}");
    let e = TransientConfig::parse(
        "[standardization]\nband = 3\n",
        std::path::Path::new("x.toml"),
    )
    .unwrap_err();
    assert!(e.to_string().contains("x.toml"), "{e}");
}
