//! The Hubble-flow distance scale of the transient method against astropy:
//! luminosity distance, comoving distance and distance modulus of flat ΛCDM
//! universes (tests/reference/make_cosmology_fixtures.py, astropy
//! FlatLambdaCDM with Tcmb0 = 0, which evaluates its closed form in
//! hypergeometric functions, independent of rung's numerical integral).

use rung::ladder::transient::cosmology::{C_KM_S, FlatLcdm};
use serde_json::Value;

fn fixtures() -> Vec<Value> {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/cosmology_fixtures.json"
    ))
    .expect("tests/reference/cosmology_fixtures.json");
    let v: Value = serde_json::from_str(&text).unwrap();
    v["cases"].as_array().unwrap().clone()
}

#[test]
fn luminosity_distance_matches_astropy() {
    let cases = fixtures();
    assert!(cases.len() >= 50);
    for c in &cases {
        let f = |k: &str| c[k].as_f64().unwrap();
        let m = FlatLcdm::new(f("h0_km_s_mpc"), f("omega_m")).unwrap();
        let z = f("z");
        let dl = m.luminosity_distance_mpc(z).unwrap();
        let dc = m.comoving_distance_mpc(z).unwrap();
        let mu = m.distance_modulus(z).unwrap();
        assert!(
            (dl / f("luminosity_distance_mpc") - 1.0).abs() < 1e-9,
            "{c}: d_L {dl}"
        );
        assert!(
            (dc / f("comoving_distance_mpc") - 1.0).abs() < 1e-9,
            "{c}: D_C {dc}"
        );
        assert!((mu - f("distance_modulus_mag")).abs() < 1e-8, "{c}: μ {mu}");
    }
}

#[test]
fn the_linear_hubble_law_puts_peaks_too_bright_at_moderate_redshift() {
    // The linear law d = c z / H0 against flat ΛCDM (H0 = 70, Ωm = 0.3, the
    // values of config/transient.toml): at z = 0.08 the law's distance modulus
    // is 0.13 mag short and at z = 0.15 0.23 mag short (astropy fixtures), so a
    // peak predicted from it would be that much too bright.
    let cases = fixtures();
    for (z, short) in [(0.08, 0.127), (0.15, 0.226)] {
        let c = cases
            .iter()
            .find(|c| c["z"] == z && c["h0_km_s_mpc"] == 70.0 && c["omega_m"] == 0.3)
            .unwrap();
        let law = 5.0 * (C_KM_S * z / 70.0 * 1.0e5_f64).log10();
        let lcdm = c["distance_modulus_mag"].as_f64().unwrap();
        assert!(
            (lcdm - law - short).abs() < 0.002,
            "z = {z}: {}",
            lcdm - law
        );
        let rung = FlatLcdm::new(70.0, 0.3)
            .unwrap()
            .distance_modulus(z)
            .unwrap();
        assert!((rung - lcdm).abs() < 1e-8);
    }
}
