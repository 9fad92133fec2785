//! The photometer end to end: site, instant, target, sky, instrument, through
//! the `ExposureModel` face the distance methods use. Physical sense (facts of
//! the trade) rather than published numbers; each check says why it must hold.

use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::site::Site;
use rung::astro::time::{Instant, parse_instant};
use rung::ladder::ExposureModel;
use rung::photometry::ccd::{self, Conditions};
use rung::photometry::{Photometer, instrument};
use rung::sky::{BandSet, SkyGeometry, sky_brightness};

fn site() -> Site {
    rung::io::sites::resolve("pampa-lucero").unwrap()
}

fn photometer() -> Photometer {
    let ins = instrument::parse_instruments(
        instrument::BUILTIN_INSTRUMENTS,
        std::path::Path::new("config/instruments.toml"),
    )
    .unwrap()
    .remove(0);
    Photometer::new(ins, BandSet::builtin().unwrap(), site())
}

/// The Moon's direction as ICRS-like RA/Dec degrees (GCRS axes; aberration of
/// ~20″ does not matter for a 20° offset).
fn moon_radec_deg(ctx: &Context) -> (f64, f64) {
    let p = ctx.moon_geo_pv()[0];
    let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
    (
        p[1].atan2(p[0]).to_degrees().rem_euclid(360.0),
        (p[2] / r).asin().to_degrees(),
    )
}

/// First hour from `from` (within `days`) where `ok` holds.
fn find(site: &Site, from: &str, days: u32, ok: impl Fn(&Context) -> bool) -> Context {
    let t0 = parse_instant(from).unwrap();
    for h in 0..days * 24 * 4 {
        let t: Instant = t0.add_seconds(900.0 * h as f64);
        let ctx = Context::exact(site, t).unwrap();
        if ok(&ctx) {
            return ctx;
        }
    }
    panic!("no instant found from {from}");
}

#[test]
fn full_moon_makes_a_v20_snr100_exposure_much_longer() {
    // Fact of the trade: a faint star is sky-limited, so t ∝ sky flux; a full
    // Moon 20° away brightens the V sky by ~4 mag (×40), so the exposure grows
    // by more than an order of magnitude.
    let s = site();
    let ph = photometer();
    let full = find(&s, "2026-12-20T00:00:00Z", 12, |c| {
        c.moon_phase_angle_rad().to_degrees() < 20.0
            && c.moon().alt_geom_rad.to_degrees() > 35.0
            && c.sun().alt_geom_rad.to_degrees() < -18.0
    });
    let (ra, dec_m) = moon_radec_deg(&full);
    // The topocentric Moon is up to ~1° from the geocentric direction
    // (horizontal parallax); step the target's declination until it is 20° away.
    let mut dec = dec_m - 20.0;
    for _ in 0..5 {
        let sep = SkyGeometry::at(&full, &CatalogPlace::fixed_deg(ra, dec))
            .moon_sep_rad
            .to_degrees();
        dec += sep - 20.0;
    }
    let target = CatalogPlace::fixed_deg(ra, dec);
    let g = SkyGeometry::at(&full, &target);
    assert!((g.moon_sep_rad.to_degrees() - 20.0).abs() < 0.05);
    let e_full = ph.exptime_at(20.0, "V", 100.0, &full, &target).unwrap();
    assert!((e_full.moon_separation_deg - 20.0).abs() < 0.05);

    // New Moon: the Moon is down with the Sun; the same target altitude is
    // sought among stars at the same declination.
    let new = find(&s, "2026-12-05T00:00:00Z", 12, |c| {
        c.moon_phase_angle_rad().to_degrees() > 160.0 && c.sun().alt_geom_rad.to_degrees() < -25.0
    });
    let alt_full = e_full.altitude_deg;
    let mut best: Option<(f64, CatalogPlace)> = None;
    for i in 0..360 {
        let p = CatalogPlace::fixed_deg(i as f64, dec);
        let alt = new.observe(&p).alt_rad.to_degrees();
        if best.is_none_or(|(b, _)| (alt - alt_full).abs() < (b - alt_full).abs()) {
            best = Some((alt, p));
        }
    }
    let (alt_new, target_new) = best.unwrap();
    assert!((alt_new - alt_full).abs() < 1.0);
    let e_new = ph.exptime_at(20.0, "V", 100.0, &new, &target_new).unwrap();
    assert!(e_new.sky.moon_mag_arcsec2.is_none() || e_new.sky_mag_arcsec2 > 21.5);
    let ratio = e_full.budget.exptime_s / e_new.budget.exptime_s;
    assert!(
        ratio > 10.0,
        "full {} s (sky {}), new {} s (sky {})",
        e_full.budget.exptime_s,
        e_full.sky_mag_arcsec2,
        e_new.budget.exptime_s,
        e_new.sky_mag_arcsec2
    );
    assert!(e_new.sky_mag_arcsec2 - e_full.sky_mag_arcsec2 > 3.0);
}

#[test]
fn airmass_two_gives_lower_snr_than_airmass_one() {
    // Fact of the trade: more air means more extinction, a brighter sky and
    // more scintillation. Same star, exposure and Moon-free sky; airmass 1
    // (zenith) against airmass 2 (Kasten–Young altitude 29.9°).
    let b = BandSet::builtin().unwrap();
    let v = b.get("V").unwrap();
    let ph = photometer();
    let alt2 = rung::astro::airmass::altitude_for_airmass_deg(2.0).unwrap();
    let sky = |alt: f64| {
        let g = SkyGeometry {
            target_alt_rad: alt.to_radians(),
            moon_alt_rad: (-20f64).to_radians(),
            moon_sep_rad: 1.5,
            moon_phase_rad: 1.0,
            sun_alt_rad: (-30f64).to_radians(),
        };
        sky_brightness(v, &b.twilight, &g).unwrap().sky_mag_arcsec2
    };
    for mag in [12.0, 18.0, 21.0] {
        let snr = |x: f64, alt: f64| {
            let c = Conditions {
                airmass: x,
                sky_mag_arcsec2: sky(alt),
                seeing_fwhm_arcsec: 1.3,
                site_elev_m: 3120.0,
            };
            ccd::rates(&ph.instrument, v, mag, &c)
                .unwrap()
                .snr_for(120.0, &ph.instrument)
                .unwrap()
                .snr
        };
        let (s1, s2) = (snr(1.0, 90.0), snr(2.0, alt2));
        assert!(s2 < s1, "mag {mag}: X=1 {s1}, X=2 {s2}");
    }
    // Also through the context: the same star when high and when low.
    let s = site();
    let place = CatalogPlace::fixed_deg(60.0, -30.0);
    let mut high: Option<(f64, Context)> = None;
    let mut low: Option<(f64, Context)> = None;
    let t0 = parse_instant("2026-12-09T00:00:00Z").unwrap();
    for h in 0..48 {
        let ctx = Context::exact(&s, t0.add_seconds(900.0 * h as f64)).unwrap();
        let p = rung::astro::pointing(&s, &ctx, &place);
        if p.sun_altitude_deg > -18.0 || p.moon_altitude_deg > 0.0 {
            continue;
        }
        if let Some(x) = p.airmass {
            if x < 1.1 && high.is_none() {
                high = Some((x, ctx));
            }
            if (x - 2.0).abs() < 0.2 && low.is_none() {
                low = Some((x, ctx));
            }
        }
    }
    let (high, low) = (high.unwrap().1, low.unwrap().1);
    let a = ph.snr(19.0, "V", 300.0, &high, &place).unwrap();
    let z = ph.snr(19.0, "V", 300.0, &low, &place).unwrap();
    assert!(z < a, "high {a}, low {z}");
}

#[test]
fn exposure_model_face_is_consistent() {
    let s = site();
    let ph = photometer();
    let em: &dyn ExposureModel = &ph;
    let ctx = Context::exact(&s, parse_instant("2026-12-09T04:00:00Z").unwrap()).unwrap();
    let place = CatalogPlace::fixed_deg(60.0, -30.0);
    let (t, n) = em.exptime(19.0, "V", 80.0, &ctx, &place).unwrap();
    assert!(t > 0.0 && n >= 1);
    let back = em.snr(19.0, "V", t, &ctx, &place).unwrap();
    assert!((back - 80.0).abs() < 0.01, "{back}");
    assert_eq!(em.readout_s(), ph.instrument.readout_s);
    assert_eq!(em.visit_overhead_s(), ph.instrument.visit_overhead_s);
    assert_eq!(em.seeing_fwhm_arcsec(), 1.3);
    // Worse seeing, lower SNR (more sky in the aperture).
    let bad = photometer().with_seeing(2.6).unwrap();
    assert!(bad.snr(19.0, "V", t, &ctx, &place).unwrap() < back);
    // A star that saturates even in the shortest exposure is an error on this face.
    let e = em
        .exptime(3.0, "V", 100.0, &ctx, &place)
        .unwrap_err()
        .to_string();
    assert!(e.contains("saturates"), "{e}");
    // Bad input through the face.
    assert!(em.snr(f64::NAN, "V", 10.0, &ctx, &place).is_err());
    assert!(em.snr(19.0, "V", -10.0, &ctx, &place).is_err());
    assert!(
        em.snr(19.0, "Q", 10.0, &ctx, &place)
            .unwrap_err()
            .to_string()
            .contains("unknown band")
    );
    assert!(em.exptime(19.0, "V", 0.0, &ctx, &place).is_err());
    assert!(photometer().with_seeing(-1.0).is_err());
    // A target below the horizon.
    let under = CatalogPlace::fixed_deg(60.0, 80.0);
    let e = em
        .snr(19.0, "V", 10.0, &ctx, &under)
        .unwrap_err()
        .to_string();
    assert!(e.contains("below the horizon"), "{e}");
}

#[test]
fn demo_photometer_resolves_by_name() {
    // Photometer::demo uses the catalogue (with any user override); with an
    // empty user folder it is the built-in lucero-1m.
    let dir = tempfile::tempdir().unwrap();
    // SAFETY: the other tests read the environment only through std::env, which
    // std serializes with its own lock; no foreign code reads it here.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", dir.path()) };
    let ph = Photometer::demo(&site()).unwrap();
    assert_eq!(ph.instrument.name, "lucero-1m");
    std::fs::write(
        dir.path().join("instruments.toml"),
        instrument::BUILTIN_INSTRUMENTS
            .replace("name = \"lucero-1m\"", "name = \"garage-40cm\"")
            .replace("aperture_m = 1.0", "aperture_m = 0.4"),
    )
    .unwrap();
    let g = Photometer::from_name("garage-40cm", &site()).unwrap();
    assert_eq!(g.instrument.aperture_m, 0.4);
    assert!(Photometer::from_name("lucero-1m", &site()).is_ok());
    let e = Photometer::from_name("nope", &site())
        .unwrap_err()
        .to_string();
    assert!(e.contains("garage-40cm") && e.contains("lucero-1m"), "{e}");
    unsafe { std::env::remove_var("RUNG_CONFIG_DIR") };
}
