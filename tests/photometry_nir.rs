//! The near-infrared bands J, H, K: zero points, extinction, the airglow and
//! thermal sky model (docs/science.md, Sky brightness; config/bands.toml) and
//! exposures with the invented near-infrared camera `lucero-1m-ir`.
//! Fixture values from astropy by tests/reference/make_nir_sky_fixtures.py.

use rung::ladder::ExposureModel;
use rung::photometry::{BandSet, Photometer};
use rung::sky::{InfraredSky, SkyGeometry, blackbody_mag_arcsec2, sky_brightness, van_rhijn};

fn fixtures() -> serde_json::Value {
    let p = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/nir_sky_fixtures.json"
    );
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn geom(alt_deg: f64, moon_alt_deg: f64, sep_deg: f64, sun_alt_deg: f64) -> SkyGeometry {
    SkyGeometry {
        target_alt_rad: alt_deg.to_radians(),
        moon_alt_rad: moon_alt_deg.to_radians(),
        moon_sep_rad: sep_deg.to_radians(),
        moon_phase_rad: 0.0,
        sun_alt_rad: sun_alt_deg.to_radians(),
    }
}

#[test]
fn zero_points_agree_with_their_jansky_values() {
    // Cohen, Wheaton & Megeath (2003), AJ 126, 1090 (quoted from memory): the
    // 2MASS zero points as F_λ and as 1594, 1024, 666.7 Jy; astropy's
    // spectral_density turns the Jansky into F_λ at the isophotal wavelength
    // (fixture). The two agree to 2 % (H differs most: its F_λ and F_ν are
    // averaged over the passband differently).
    let bands = BandSet::builtin().unwrap();
    for f in fixtures()["flambda_from_jansky"].as_array().unwrap() {
        let b = bands.get(f["band"].as_str().unwrap()).unwrap();
        let want = f["flambda_cgs"].as_f64().unwrap();
        assert!(
            (b.flambda_zero_cgs / want - 1.0).abs() < 0.025,
            "{}: {} against {want}",
            b.name,
            b.flambda_zero_cgs
        );
    }
    // Extinction at La Palma, J 0.10, H 0.11, K 0.07 mag per airmass (the WHT
    // infrared camera manual, checked).
    let k: Vec<f64> = ["J", "H", "K"]
        .iter()
        .map(|b| bands.get(b).unwrap().extinction_mag_per_airmass)
        .collect();
    assert_eq!(k, vec![0.10, 0.11, 0.07]);
}

#[test]
fn black_body_through_the_passbands_matches_astropy() {
    let bands = BandSet::builtin().unwrap();
    for f in fixtures()["blackbody_mag_arcsec2"].as_array().unwrap() {
        let b = bands.get(f["band"].as_str().unwrap()).unwrap();
        let t = f["temperature_k"].as_f64().unwrap();
        let want = f["mag_arcsec2"].as_f64().unwrap();
        let got = blackbody_mag_arcsec2(b, t);
        assert!(
            (got - want).abs() < 1e-3,
            "{} at {t} K: {got} against {want}",
            b.name
        );
    }
}

#[test]
fn van_rhijn_by_hand() {
    // (R/(R + h))² with R = 6371 km, h = 87 km: (6371/6458)² = 0.973235.
    // z = 60°: 1/√(1 − 0.973235 × 0.75) = 1/√0.270074 = 1.92425.
    assert!((van_rhijn(60f64.to_radians(), 87.0) - 1.924_25).abs() < 1e-4);
    assert!((van_rhijn(0.0, 87.0) - 1.0).abs() < 1e-15);
    // At the horizon 1/√(1 − 0.973235) = 6.1125: finite, unlike sec z.
    assert!((van_rhijn(std::f64::consts::FRAC_PI_2, 87.0) - 6.1125).abs() < 1e-3);
}

#[test]
fn the_infrared_sky_is_airglow_and_heat_not_moonlight() {
    let bands = BandSet::builtin().unwrap();
    let tw = bands.twilight;
    let dark = geom(90.0, -30.0, 90.0, -30.0);
    let s = |b: &str, g: &SkyGeometry| sky_brightness(bands.get(b).unwrap(), &tw, g).unwrap();
    // Zenith at 10 °C: J and H within the ranges measured at La Palma (J
    // 15.4–16.4, H 13.5–14.7; the INGRID camera's pages, checked), K near
    // 13 (Paranal about 13.0, quoted from memory; La Palma's warm telescope
    // 11.9–12.5): the model's 13.1.
    let (j, h, k) = (s("J", &dark), s("H", &dark), s("K", &dark));
    assert!(
        (15.4..16.4).contains(&j.sky_mag_arcsec2),
        "{}",
        j.sky_mag_arcsec2
    );
    assert!(
        (13.5..14.7).contains(&h.sky_mag_arcsec2),
        "{}",
        h.sky_mag_arcsec2
    );
    assert!(
        (12.8..13.4).contains(&k.sky_mag_arcsec2),
        "{}",
        k.sky_mag_arcsec2
    );
    assert_eq!(k.model, "infrared");
    assert!(k.moon_mag_arcsec2.is_none());
    // K is thermal, J is airglow: the thermal term outshines the airglow in K
    // and is negligible in J.
    assert!(k.thermal_mag_arcsec2.unwrap() < k.airglow_mag_arcsec2.unwrap());
    assert!(j.thermal_mag_arcsec2.unwrap() - j.airglow_mag_arcsec2.unwrap() > 10.0);
    // A full Moon 30° away brightens V by magnitudes but leaves J, H, K alone
    // (the Moon term is optical only).
    let moon = geom(90.0, 60.0, 30.0, -30.0);
    assert!(s("V", &moon).sky_mag_arcsec2 < s("V", &dark).sky_mag_arcsec2 - 1.0);
    for b in ["J", "H", "K"] {
        assert_eq!(
            s(b, &moon).sky_mag_arcsec2,
            s(b, &dark).sky_mag_arcsec2,
            "{b}"
        );
    }
    // Within 20° of the Moon rung says the model leaves moonlight out.
    let close = s("J", &geom(70.0, 60.0, 12.0, -30.0));
    assert!(
        close
            .notes
            .iter()
            .any(|n| n.contains("leaves moonlight out")),
        "{:?}",
        close.notes
    );
    // Lower down the airglow brightens (van Rhijn) and so does the sky.
    assert!(s("H", &geom(30.0, -30.0, 90.0, -30.0)).sky_mag_arcsec2 < h.sky_mag_arcsec2 - 0.5);
}

#[test]
fn the_k_sky_doubles_from_winter_to_summer() {
    // A fact of the trade (the INGRID camera's pages, checked): "during
    // summer nights (T ~ 15 C) background brightnesses in K and Ks are
    // approximately twice the quantities measured in winter time"; J and H,
    // set by airglow, do not follow the temperature.
    let bands = BandSet::builtin().unwrap();
    let dark = geom(90.0, -30.0, 90.0, -30.0);
    let at = |b: &str, t_c: f64| {
        let mut band = bands.get(b).unwrap().clone();
        let ir: &mut InfraredSky = band.infrared.as_mut().unwrap();
        ir.ambient_temperature_c = t_c;
        sky_brightness(&band, &bands.twilight, &dark)
            .unwrap()
            .sky_mag_arcsec2
    };
    let ratio = 10f64.powf(0.4 * (at("K", 3.0) - at("K", 15.0)));
    assert!((1.6..2.6).contains(&ratio), "{ratio}");
    assert!((at("J", 3.0) - at("J", 15.0)).abs() < 0.001);
    assert!((at("H", 3.0) - at("H", 15.0)).abs() < 0.01);
}

#[test]
fn the_infrared_camera_exposes_like_the_optical_one() {
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let ir = Photometer::from_name("lucero-1m-ir", &site).unwrap();
    let t = rung::astro::time::parse_instant("2026-12-02T04:00:00Z").unwrap();
    let ctx = rung::astro::frames::Context::exact(&site, t).unwrap();
    let star = rung::astro::frames::CatalogPlace::fixed_deg(60.0, -30.0);
    for b in ["J", "H", "K"] {
        // SNR and exposure are inverse problems of one CCD equation.
        let (x, n) = ir.exptime(16.0, b, 50.0, &ctx, &star).unwrap();
        let snr = ir.snr(16.0, b, x, &ctx, &star).unwrap();
        assert!((snr - 50.0).abs() < 0.05, "{b}: {snr}");
        // Sky-limited and split into short sub-exposures (60 s at most:
        // the near-infrared practice of many short dithered frames).
        let e = ir.exptime_at(16.0, b, 50.0, &ctx, &star).unwrap();
        assert!(e.budget.sub_exptime_s <= 60.0 + 1e-9 && n >= 1, "{b}");
        assert!(
            e.budget.noise_sky_e > e.budget.noise_read_e,
            "{b}: not sky-limited"
        );
        assert_eq!(e.sky.model, "infrared");
    }
    // The optical camera has no near-infrared throughput: a clear refusal.
    let opt = Photometer::from_name("lucero-1m", &site).unwrap();
    let e = opt
        .exptime(16.0, "K", 50.0, &ctx, &star)
        .unwrap_err()
        .to_string();
    assert!(e.contains("K") && e.contains("lucero-1m"), "{e}");
}
