//! The photon zero point, the CCD equation and its inverse problems.
//!
//! Sources are named beside each check: Bessell, Castelli & Plez (1998) for
//! f_λ (quoted from memory); "about 1000 photons s⁻¹ cm⁻² Å⁻¹ at V = 0" (common
//! practice); the CCD equation of Merline & Howell (1995) / Howell, Handbook of
//! CCD Astronomy — no worked example from the handbook can be recalled reliably,
//! so the equation is checked against an explicit hand calculation written out
//! below; Young (1967) scintillation by hand; limiting cases that follow from
//! the equation's form (facts of the trade).

use rung::photometry::ccd::{
    self, BACKGROUND_LIMITED_RADIUS_FWHM, Conditions, FWHM_PER_SIGMA, Rates, scintillation_young,
};
use rung::photometry::instrument::{self, Instrument};
use rung::sky::BandSet;

fn demo() -> Instrument {
    instrument::parse_instruments(
        instrument::BUILTIN_INSTRUMENTS,
        std::path::Path::new("config/instruments.toml"),
    )
    .unwrap()
    .into_iter()
    .find(|i| i.name == instrument::DEMO_INSTRUMENT)
    .unwrap()
}

/// Bare rates: one electron per second of star, nothing else.
fn bare() -> Rates {
    Rates {
        star_e_per_s: 1.0,
        sky_e_per_pix_s: 0.0,
        dark_e_per_pix_s: 0.0,
        read_e: 0.0,
        scint_frac_sqrt_s: 0.0,
        sigma_pix: 2.0,
        background_pixels: 1e12,
        peak_fraction: 0.04,
        max_radius_pix: 6.0 * FWHM_PER_SIGMA,
        extinction_mag: 0.0,
    }
}

#[test]
fn v_zero_point_is_about_1000_photons() {
    // Bessell, Castelli & Plez (1998), Table A2 (quoted from memory): f_λ(V=0)
    // = 363.1e-11 erg cm⁻² s⁻¹ Å⁻¹ at λ_eff = 5450 Å (the SCIENCE notes give 3.63e-9).
    let b = BandSet::builtin().unwrap();
    let v = b.get("V").unwrap();
    assert!((v.flambda_zero_cgs - 3.631e-9).abs() < 1e-12);
    assert!((v.lambda_eff_angstrom - 5450.0).abs() < 1e-9);
    // f_λ λ / (h c) = 3.631e-9 × 5.45e-5 / (6.626e-27 × 2.998e10) ≈ 996
    // photons s⁻¹ cm⁻² Å⁻¹; "about 1000" is common practice.
    let n = v.photon_zero_per_s_cm2_angstrom();
    assert!((n - 996.2).abs() < 0.5, "{n}");
    assert!((n - 1000.0).abs() / 1000.0 < 0.02);
    // Five magnitudes fainter is a hundred times fewer photons.
    assert!((v.photons_per_s_cm2(0.0) / v.photons_per_s_cm2(5.0) - 100.0).abs() < 1e-9);
    // Other zero points (Bessell et al. 1998, from memory): U 417.5, B 632,
    // R 217.7, I 112.6 × 10⁻¹¹.
    for (name, f) in [
        ("U", 4.175e-9),
        ("B", 6.32e-9),
        ("R", 2.177e-9),
        ("I", 1.126e-9),
    ] {
        assert!(
            (b.get(name).unwrap().flambda_zero_cgs - f).abs() < 1e-13,
            "{name}"
        );
    }
}

#[test]
fn ccd_equation_against_a_hand_calculation() {
    // Hand calculation (no handbook example is recalled reliably):
    // N* = 10 000 e⁻ in the aperture, n_pix = 50, n_B = 500, N_S = 100 e⁻/px,
    // N_D = 5 e⁻/px, N_R = 8 e⁻, one exposure, no scintillation.
    //   variance = N* + n_pix (1 + n_pix/n_B)(N_S + N_D + N_R²)
    //            = 10 000 + 50 × 1.1 × (100 + 5 + 64) = 10 000 + 9 295 = 19 295
    //   SNR = 10 000 / √19 295 = 10 000 / 138.906 = 71.99
    let t = 10.0;
    let r = (50.0 / std::f64::consts::PI).sqrt();
    let sigma = 2.0;
    let frac = 1.0 - (-r * r / (2.0 * sigma * sigma)).exp();
    let rates = Rates {
        star_e_per_s: 10_000.0 / frac / t,
        sky_e_per_pix_s: 100.0 / t,
        dark_e_per_pix_s: 5.0 / t,
        read_e: 8.0,
        background_pixels: 500.0,
        sigma_pix: sigma,
        ..bare()
    };
    let b = rates.evaluate(t, 1, r, f64::INFINITY);
    assert!((b.aperture_pixels - 50.0).abs() < 1e-9);
    assert!((b.star_electrons - 10_000.0).abs() < 1e-6);
    assert!((b.noise_total_e.powi(2) - 19_295.0).abs() < 1e-6);
    assert!((b.snr - 71.99).abs() < 0.005, "{}", b.snr);
    // Two sub-exposures count the read noise twice: 10 000 + 55 × (105 + 128).
    let b2 = rates.evaluate(t, 2, r, f64::INFINITY);
    assert!((b2.noise_total_e.powi(2) - (10_000.0 + 55.0 * 233.0)).abs() < 1e-6);
    // The terms add in quadrature to the total.
    let sum = b.noise_star_e.powi(2)
        + b.noise_sky_e.powi(2)
        + b.noise_dark_e.powi(2)
        + b.noise_read_e.powi(2)
        + b.noise_scintillation_e.powi(2);
    assert!((sum - b.noise_total_e.powi(2)).abs() < 1e-6);
}

#[test]
fn digitization_noise_joins_the_read_noise() {
    // Merline & Howell (1995): the read term is N_R² + G² σ_f², σ_f ≈ 0.289 ADU.
    let ins = demo();
    let b = BandSet::builtin().unwrap();
    let c = Conditions {
        airmass: 1.0,
        sky_mag_arcsec2: 21.8,
        seeing_fwhm_arcsec: 1.3,
        site_elev_m: 0.0,
    };
    let r = ccd::rates(&ins, b.get("V").unwrap(), 15.0, &c).unwrap();
    let expect = (ins.read_noise_e.powi(2) + (ins.gain_e_per_adu * 0.2887).powi(2)).sqrt();
    assert!((r.read_e - expect).abs() < 1e-3);
}

#[test]
fn limiting_cases() {
    // Facts of the trade that follow from the CCD equation.
    let r = 3.0;
    // Source-limited (no sky, dark, read noise or scintillation): SNR = √N*,
    // so four times the electrons doubles the SNR.
    let src = Rates {
        star_e_per_s: 1e4,
        ..bare()
    };
    let a = src.evaluate(10.0, 1, r, f64::INFINITY);
    assert!((a.snr - a.star_electrons.sqrt()).abs() < 1e-9);
    let bright = Rates {
        star_e_per_s: 4e4,
        ..bare()
    };
    let b = bright.evaluate(10.0, 1, r, f64::INFINITY);
    assert!((b.snr / a.snr - 2.0).abs() < 1e-12);
    // Sky-limited: SNR ∝ √t.
    let sky = Rates {
        star_e_per_s: 1.0,
        sky_e_per_pix_s: 1e4,
        ..bare()
    };
    let s1 = sky.evaluate(100.0, 1, r, f64::INFINITY).snr;
    let s4 = sky.evaluate(400.0, 1, r, f64::INFINITY).snr;
    assert!((s4 / s1 - 2.0).abs() < 1e-3, "{}", s4 / s1);
    // Read-noise-limited: SNR ∝ t.
    let rn = Rates {
        star_e_per_s: 1.0,
        read_e: 1e3,
        ..bare()
    };
    let r1 = rn.evaluate(10.0, 1, r, f64::INFINITY).snr;
    let r2 = rn.evaluate(20.0, 1, r, f64::INFINITY).snr;
    assert!((r2 / r1 - 2.0).abs() < 1e-3, "{}", r2 / r1);
}

#[test]
fn scintillation_by_hand() {
    // Young (1967): σ = 0.09 D^(−2/3) X^1.75 exp(−h/8000) (2t)^(−1/2).
    // D = 100 cm, X = 1, h = 0, t = 1 s: 0.09 × 0.046416 / 1.41421 = 0.0029539.
    let s = scintillation_young(100.0, 1.0, 0.0, 1.0);
    assert!((s - 0.002_953_9).abs() < 1e-7, "{s}");
    // X = 2 multiplies by 2^1.75 = 3.3636; h = 8000 m divides by e; t × 4 halves it.
    assert!((scintillation_young(100.0, 2.0, 0.0, 1.0) / s - 3.363_586).abs() < 1e-5);
    assert!((scintillation_young(100.0, 1.0, 8000.0, 1.0) / s - (-1.0f64).exp()).abs() < 1e-12);
    assert!((scintillation_young(100.0, 1.0, 0.0, 4.0) / s - 0.5).abs() < 1e-12);
}

#[test]
fn background_limited_optimal_aperture() {
    // Derivation: for a Gaussian star on a dominant background, SNR ∝
    // (1 − e^{−u})/√u with u = r²/2σ²; its maximum solves e^{−u}(2u + 1) = 1.
    let mut lo = 0.5f64;
    let mut hi = 3.0f64;
    for _ in 0..100 {
        let m = 0.5 * (lo + hi);
        if (-m).exp() * (2.0 * m + 1.0) > 1.0 {
            lo = m;
        } else {
            hi = m;
        }
    }
    let u = 0.5 * (lo + hi);
    assert!((u - 1.2564).abs() < 1e-4);
    let r_fwhm = (2.0 * u).sqrt() / FWHM_PER_SIGMA;
    assert!(
        (r_fwhm - BACKGROUND_LIMITED_RADIUS_FWHM).abs() < 5e-4,
        "{r_fwhm}"
    );
    // The numerical optimum of the full equation tends to it for a faint star on a bright sky.
    let sky = Rates {
        star_e_per_s: 1.0,
        sky_e_per_pix_s: 1e3,
        sigma_pix: 2.0,
        ..bare()
    };
    let best = sky.best_radius_pix(100.0, 1) / (2.0 * FWHM_PER_SIGMA);
    assert!((best - r_fwhm).abs() < 0.003, "{best}");
    // For a bright star (source-limited) the optimum aperture is larger.
    let bright = Rates {
        star_e_per_s: 1e6,
        sky_e_per_pix_s: 10.0,
        sigma_pix: 2.0,
        ..bare()
    };
    assert!(bright.best_radius_pix(100.0, 1) / (2.0 * FWHM_PER_SIGMA) > 1.0);
}

fn demo_rates(mag: f64) -> Rates {
    let ins = demo();
    let b = BandSet::builtin().unwrap();
    let c = Conditions {
        airmass: 1.2,
        sky_mag_arcsec2: 21.5,
        seeing_fwhm_arcsec: 1.3,
        site_elev_m: 3120.0,
    };
    ccd::rates(&ins, b.get("V").unwrap(), mag, &c).unwrap()
}

#[test]
fn closed_form_exptime_inverts_the_equation() {
    // Scintillation included: the closed form stays exact (see Rates::exptime_closed_form).
    for mag in [12.0, 16.0, 19.0, 22.0] {
        let r = demo_rates(mag);
        for (snr, n) in [(10.0, 1), (100.0, 1), (100.0, 3)] {
            let rad = 2.0;
            let t = r.exptime_closed_form(snr, n, rad);
            let got = r.evaluate(t, n, rad, f64::INFINITY).snr;
            assert!((got / snr - 1.0).abs() < 1e-9, "mag {mag} snr {snr}: {got}");
        }
    }
    // The full solver (optimal aperture, split) reaches the goal.
    let ins = demo();
    for mag in [14.0, 18.0, 20.0, 22.0] {
        let b = demo_rates(mag).exptime_for(50.0, &ins).unwrap();
        assert!(b.snr >= 50.0 * (1.0 - 1e-6), "{mag}: {}", b.snr);
        assert!(
            b.snr <= 50.0 * 1.001 || b.exptime_s == ins.min_exptime_s,
            "{mag}: {}",
            b.snr
        );
        assert!(!b.saturated);
        assert!(b.sub_exptime_s <= ins.max_sub_exptime_s + 1e-9);
    }
}

#[test]
fn bright_stars_are_split_and_very_bright_ones_saturate() {
    let ins = demo();
    // V = 11, SNR 1000: one exposure would pass the linear limit; it is split
    // so that every sub-exposure stays under it.
    let r = demo_rates(11.0);
    let single = r.evaluate(
        r.exptime_closed_form(1000.0, 1, 4.0),
        1,
        4.0,
        ins.saturation_e(),
    );
    assert!(single.peak_pixel_electrons > ins.peak_limit_e());
    let b = r.exptime_for(1000.0, &ins).unwrap();
    assert!(b.n_exposures > 1, "{b:?}");
    assert!(b.peak_pixel_electrons <= ins.peak_limit_e() * (1.0 + 1e-9));
    assert!(!b.saturated);
    assert!(b.snr >= 1000.0 * (1.0 - 1e-6));
    // V = 6 passes the full well in the shortest exposure (1 s): flagged.
    let b = demo_rates(6.0).exptime_for(100.0, &ins).unwrap();
    assert!(b.saturated && b.peak_pixel_electrons > ins.saturation_e());
}

/// The exposure search against its own rules, checked by brute force:
/// every sub-exposure within the shutter's shortest and the instrument's
/// longest exposure, the peak pixel under the linear limit unless even the
/// shortest exposure passes it, the goal reached, and no split with fewer
/// sub-exposures reaching the goal within those rules (so no shorter total).
#[test]
fn the_exposure_search_keeps_its_rules_and_finds_the_fewest_splits() {
    let ins = demo();
    let lin = ins.peak_limit_e();
    let mut checked = 0;
    for mag in (0..=60).map(|i| 6.0 + 0.25 * i as f64) {
        let r = demo_rates(mag);
        for snr in [20.0, 100.0, 300.0, 600.0, 1000.0] {
            let Ok(b) = r.exptime_for(snr, &ins) else {
                continue;
            };
            checked += 1;
            let what = format!("V = {mag}, SNR {snr}: {b:?}");
            let sub = b.sub_exptime_s;
            assert!(sub >= ins.min_exptime_s * (1.0 - 1e-9), "{what}");
            assert!(sub <= ins.max_sub_exptime_s * (1.0 + 1e-9), "{what}");
            assert!(b.snr >= snr * (1.0 - 1e-6), "{what}");
            let shortest_passes = r.peak_e_per_s() * ins.min_exptime_s > lin;
            if shortest_passes {
                assert!((sub - ins.min_exptime_s).abs() < 1e-9, "{what}");
            } else {
                assert!(b.peak_pixel_electrons <= lin * (1.0 + 1e-9), "{what}");
                assert!(!b.saturated, "{what}");
            }
            // Fewer sub-exposures, each as long as the rules allow, fall short.
            let cap = r.longest_sub_s(&ins).max(ins.min_exptime_s);
            for n in 1..b.n_exposures {
                let t = n as f64 * cap;
                let best = r.evaluate(t, n, r.best_radius_pix(t, n), f64::INFINITY).snr;
                assert!(
                    best < snr * (1.0 + 1e-6),
                    "{what}: {n} × {cap} s gives {best}"
                );
            }
            // The SNR of the total found splits the same way (one rule both ways).
            let back = r.snr_for(b.exptime_s, &ins).unwrap();
            assert_eq!(back.n_exposures, b.n_exposures, "{what}");
            assert!((back.snr / b.snr - 1.0).abs() < 1e-6, "{what}");
        }
    }
    assert!(checked > 200, "{checked}");
}

/// When one exposure would pass the linear limit and the total needed lies
/// between one and two of the shortest exposures, two of the shortest reach
/// the goal unsaturated: the search says so instead of one saturated exposure
/// (it used to propose one of 1.97 s whose peak pixel passed the full well).
#[test]
fn two_shortest_exposures_beat_one_that_passes_the_limit() {
    let ins = demo();
    let mut found = 0;
    for mag in (0..=80).map(|i| 8.0 + 0.05 * i as f64) {
        let r = demo_rates(mag);
        for snr in [400.0, 500.0, 600.0, 700.0] {
            let t1 = r.exptime_closed_form(snr, 1, 4.0);
            let one_passes = r.peak_e_per_s() * t1 > ins.peak_limit_e();
            let shortest_ok = r.peak_e_per_s() * ins.min_exptime_s <= ins.peak_limit_e();
            if !(t1 > 1.05 && t1 < 1.95 && one_passes && shortest_ok) {
                continue;
            }
            found += 1;
            let b = r.exptime_for(snr, &ins).unwrap();
            assert_eq!(b.n_exposures, 2, "V = {mag}, SNR {snr}: {b:?}");
            assert!(!b.saturated && b.peak_pixel_electrons <= ins.peak_limit_e());
            assert!(b.snr >= snr * (1.0 - 1e-9));
        }
    }
    assert!(found >= 3, "{found}");
}

/// Goals out of reach are refused with the reason, never answered with an
/// endless exposure, a split into billions or a false SATURATED.
#[test]
fn out_of_reach_exposures_are_refused() {
    let ins = demo();
    let e = demo_rates(29.0)
        .exptime_for(1000.0, &ins)
        .unwrap_err()
        .to_string();
    assert!(
        e.starts_with("invalid exposure: SNR 1000 needs ")
            && e.ends_with(" h of exposure with lucero-1m, more than one visit may hold (24 h)"),
        "{e}"
    );
    // A very bright star at a high goal needs more sub-exposures than a visit holds.
    let mut tiny = ins.clone();
    tiny.min_exptime_s = 1e-3;
    let e = demo_rates(-1.5)
        .exptime_for(10_000.0, &tiny)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("sub-exposures, more than the 10000 one visit may hold"),
        "{e}"
    );
    // A total shorter than the shutter allows.
    let e = demo_rates(15.0).snr_for(0.5, &ins).unwrap_err().to_string();
    assert_eq!(
        e,
        "invalid exposure time: 0.5 s is shorter than the shortest exposure of lucero-1m (1 s)"
    );
}

#[test]
fn limiting_magnitude_is_where_the_snr_reaches_the_threshold() {
    let ins = demo();
    let r = demo_rates(20.0);
    let m = r.limiting_mag(20.0, 300.0, 5.0, &ins);
    assert!(m > 21.0 && m < 25.0, "{m}");
    let at = r.fainter_by(m - 20.0).snr_for(300.0, &ins).unwrap().snr;
    assert!((at - 5.0).abs() < 1e-3, "{at}");
    // Four times the exposure in the sky-limited regime goes ~0.75 mag deeper
    // (SNR ∝ √t ∝ flux: 2.5 log10 2 = 0.753).
    let m4 = r.limiting_mag(20.0, 1200.0, 5.0, &ins);
    assert!((m4 - m - 0.753).abs() < 0.1, "{}", m4 - m);
}

#[test]
fn bad_input_is_refused_with_a_clear_error() {
    let ins = demo();
    let b = BandSet::builtin().unwrap();
    let c = Conditions {
        airmass: 1.0,
        sky_mag_arcsec2: 21.8,
        seeing_fwhm_arcsec: 1.3,
        site_elev_m: 0.0,
    };
    let e = ccd::rates(&ins, b.get("V").unwrap(), f64::NAN, &c)
        .unwrap_err()
        .to_string();
    assert!(e.contains("magnitude") && e.contains("NaN"), "{e}");
    let e = ccd::check_exptime(-5.0).unwrap_err().to_string();
    assert!(e.contains("exposure time"), "{e}");
    assert!(ccd::check_exptime(0.0).is_err());
    assert!(ccd::check_exptime(f64::INFINITY).is_err());
    let e = ccd::check_snr(0.0).unwrap_err().to_string();
    assert!(e.contains("signal-to-noise"), "{e}");
    assert!(ccd::check_snr(-3.0).is_err());
    assert!(ccd::check_snr(f64::NAN).is_err());
    let e = b.get("Z").unwrap_err().to_string();
    assert!(e.contains("unknown band 'Z'"), "{e}");
    let bad = Conditions { airmass: 0.5, ..c };
    assert!(ccd::rates(&ins, b.get("V").unwrap(), 15.0, &bad).is_err());
}
