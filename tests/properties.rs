//! Property tests (proptest) for invariants that hold for every input, not
//! only for the worked examples. Case counts are kept small because each
//! case runs the full SOFA chain; the whole file runs in seconds.

use chrono::{Duration, NaiveDate};
use proptest::prelude::*;
use rung::astro::airmass::kasten_young;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::{Limits, Night};
use rung::astro::site::Site;
use rung::astro::time::{Instant, VALID_FROM_JD, VALID_TO_JD};
use std::sync::OnceLock;

/// A site keeping the civil time of its longitude (whole-hour zone), as
/// inline sites do: local noon is then within about an hour of solar noon.
fn site(lat: f64, lon: f64, elev: f64) -> Site {
    let tz = rung::io::sites::zone_from_longitude(lon);
    Site::new("p", lat, lon, elev, tz).unwrap()
}

fn instant(jd: f64) -> Instant {
    Instant::from_jd_utc(jd).unwrap()
}

fn date(days_from_1960: i64) -> NaiveDate {
    NaiveDate::from_ymd_opt(1960, 1, 2).unwrap() + Duration::days(days_from_1960)
}

/// Days from 1960-01-02 to 2099-12-29: every night whose noons lie in rung's span.
const NIGHT_DAYS: i64 = 51_132;

fn jd_in_span() -> impl Strategy<Value = f64> {
    VALID_FROM_JD + 1.0..VALID_TO_JD - 1.0
}

/// Bound on how far the ICRS pole is from the celestial intermediate pole of
/// date, arcseconds: precession moves the pole by 20.04″ per year (IAU 2006,
/// the rate of general precession in obliquity direction; quoted from memory),
/// plus up to ~12″ of nutation and ~21″ of annual aberration (common
/// practice), with margin.
fn pole_offset_bound_deg(t: &Instant) -> f64 {
    let years = (t.julian_epoch_tt() - 2000.0).abs();
    (20.1 * years + 60.0) / 3600.0
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Altitude is an angle from the horizon: always within [−90°, 90°],
    /// observed (refracted) and geometric alike.
    #[test]
    fn altitude_is_within_plus_minus_90(
        lat in -89.99f64..89.99, lon in -180.0f64..180.0, elev in -400.0f64..5500.0,
        jd in jd_in_span(), ra in 0.0f64..360.0, dec in -90.0f64..=90.0,
    ) {
        let s = site(lat, lon, elev);
        let c = Context::exact(&s, instant(jd)).unwrap();
        for o in [c.observe(&CatalogPlace::fixed_deg(ra, dec)), c.sun(), c.moon()] {
            let a = o.alt_rad.to_degrees();
            let g = o.alt_geom_rad.to_degrees();
            prop_assert!((-90.0..=90.0).contains(&a), "observed {a}");
            prop_assert!((-90.0..=90.0).contains(&g), "geometric {g}");
            // Refraction lifts, never lowers, a body above the horizon (common practice).
            if g > 0.0 {
                prop_assert!(a >= g - 1e-9 && a - g < 1.0, "refraction {}", a - g);
            }
        }
    }

    /// Relative airmass is at least 1 above the horizon and never falls as the
    /// altitude falls (strictly growing below 88°, where the Kasten–Young fit
    /// is above 1; see `kasten_young`).
    #[test]
    fn airmass_at_least_one_and_growing_as_altitude_falls(
        h1 in 0.0f64..=90.0, h2 in 0.0f64..=90.0,
    ) {
        let (lo, hi) = if h1 < h2 { (h1, h2) } else { (h2, h1) };
        let x_lo = kasten_young(lo).unwrap();
        let x_hi = kasten_young(hi).unwrap();
        prop_assert!(x_lo >= 1.0 && x_hi >= 1.0, "X({lo})={x_lo}, X({hi})={x_hi}");
        prop_assert!(x_lo >= x_hi, "X({lo})={x_lo} < X({hi})={x_hi}");
        if hi < 88.0 && hi - lo > 1e-6 {
            prop_assert!(x_lo > x_hi);
        }
        prop_assert!(kasten_young(-lo - 1e-3).is_none());
    }

    /// Right ascension wraps at 24h: RA 359.9999° and 0.0001° are 0.0002° of
    /// RA apart (at most 0.0002° of arc), so their altitudes agree to that.
    #[test]
    fn ra_wraps_at_24h(
        lat in -89.0f64..89.0, lon in -180.0f64..180.0,
        jd in jd_in_span(), dec in -89.0f64..89.0,
    ) {
        let s = site(lat, lon, 1000.0);
        let c = Context::exact(&s, instant(jd)).unwrap();
        let a = c.observe(&CatalogPlace::fixed_deg(359.9999, dec));
        let b = c.observe(&CatalogPlace::fixed_deg(0.0001, dec));
        let d_alt = (a.alt_geom_rad - b.alt_geom_rad).to_degrees().abs();
        prop_assert!(d_alt < 0.000_25, "altitudes differ by {d_alt}°");
        prop_assert!(a.separation_rad(&b).to_degrees() < 0.000_25);
        let r = rung::io::angles::parse_ra_deg("23:59:59.99999").unwrap();
        prop_assert!(r < 360.0);
    }

    /// A target at a celestial pole stands at the latitude (north pole) or
    /// minus the latitude (south pole), to within how far precession has moved
    /// the pole of date from the ICRS pole, and refraction only lifts it.
    #[test]
    fn targets_at_the_poles_stand_at_the_latitude(
        lat in -89.99f64..89.99, lon in -180.0f64..180.0, jd in jd_in_span(),
    ) {
        let s = site(lat, lon, 2000.0);
        let t = instant(jd);
        let c = Context::exact(&s, t).unwrap();
        let bound = pole_offset_bound_deg(&t);
        for (dec, want) in [(90.0, lat), (-90.0, -lat)] {
            let o = c.observe(&CatalogPlace::fixed_deg(123.4, dec));
            let g = o.alt_geom_rad.to_degrees();
            prop_assert!((g - want).abs() < bound, "dec {dec}: alt {g} vs {want} (bound {bound})");
            let a = o.alt_rad.to_degrees();
            prop_assert!(a.is_finite() && (-90.0..=90.0).contains(&a));
            if g > 0.0 {
                prop_assert!(a >= g - 1e-9 && a - g < 1.0);
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(32))]

    /// When both happen in a night, each dusk (Sun going down through a
    /// limit) comes before the matching dawn.
    #[test]
    fn dusk_before_dawn(lat in -70.0f64..70.0, lon in -180.0f64..180.0, day in 0..NIGHT_DAYS) {
        let s = site(lat, lon, 500.0);
        let n = Night::new(&s, date(day)).unwrap();
        let e = n.events();
        for (dusk, dawn) in [
            (&e.sunset, &e.sunrise),
            (&e.civil_dusk, &e.civil_dawn),
            (&e.nautical_dusk, &e.nautical_dawn),
            (&e.astronomical_dusk, &e.astronomical_dawn),
        ] {
            for ev in [dusk, dawn] {
                if let Some(t) = ev.t {
                    prop_assert!(t >= n.start && t <= n.end);
                }
            }
            if let (Some(a), Some(b)) = (dusk.t, dawn.t) {
                prop_assert!(a < b, "dusk {} after dawn {}", a.iso(), b.iso());
            }
        }
        // Deeper twilights start later and end earlier.
        if let (Some(a), Some(b)) = (e.sunset.t, e.astronomical_dusk.t) {
            prop_assert!(a < b);
        }
    }

    /// Polar sites (|lat| up to 89.99°) give a night, its events and a target's
    /// visibility without panicking, with sane values.
    #[test]
    fn polar_sites_do_not_panic(
        lat in prop_oneof![-89.99f64..-85.0, 85.0f64..89.99],
        lon in -180.0f64..180.0, day in 0..NIGHT_DAYS, dec in -90.0f64..=90.0,
    ) {
        let s = site(lat, lon, 100.0);
        let n = Night::new(&s, date(day)).unwrap();
        let e = n.events();
        prop_assert!((0.0..=1.0).contains(&e.moon_illumination));
        let tn = n.target(&CatalogPlace::fixed_deg(200.0, dec), &Limits::default());
        prop_assert!((0.0..=25.0).contains(&tn.observable_hours));
        if let Some(a) = tn.max_altitude_deg {
            prop_assert!((-90.0..=90.0).contains(&a));
        }
    }
}

/// A few nights computed once and shared by the rise/transit/set property.
fn nights() -> &'static Vec<Night> {
    static N: OnceLock<Vec<Night>> = OnceLock::new();
    N.get_or_init(|| {
        [
            (-27.45, -68.02, "2026-12-01"),
            (38.47, -4.16, "2026-06-21"),
            (5.0, 100.0, "2031-03-15"),
        ]
        .iter()
        .map(|(lat, lon, d)| {
            let s = site(*lat, *lon, 2000.0);
            Night::new(&s, d.parse().unwrap()).unwrap()
        })
        .collect()
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(128))]

    /// Rise, transit and set between two local noons. What really holds:
    /// - if the target is down at the first noon, its first rise comes
    ///   first, so rise < transit < set whenever all three happen;
    /// - if it is up at the first noon, its first set comes before its first
    ///   rise, and the first transit is not between them (it is either before
    ///   the set, in the pass that was under way at noon, or after the rise).
    /// So "rise before transit before set" holds exactly when rise < set.
    #[test]
    fn rise_transit_set_order(k in 0usize..3, ra in 0.0f64..360.0, dec in -89.0f64..89.0) {
        let n = &nights()[k];
        let place = CatalogPlace::fixed_deg(ra, dec);
        let tn = n.target(&place, &Limits::default());
        if let (Some(r), Some(t), Some(s)) = (tn.rise.t, tn.transit.t, tn.set.t) {
            if r < s {
                prop_assert!(r < t && t < s, "rise {} transit {} set {}", r.iso(), t.iso(), s.iso());
            } else {
                prop_assert!(t < s || t > r, "transit {} between set {} and rise {}", t.iso(), s.iso(), r.iso());
            }
            let up_at_noon = n.contexts[0].observe(&place).alt_geom_rad.to_degrees()
                > rung::astro::night::STAR_RISE_SET_DEG;
            prop_assert_eq!(up_at_noon, s < r);
        }
        for w in &tn.windows {
            prop_assert!(w.0 <= w.1 && w.0 >= n.start && w.1 <= n.end);
        }
    }
}
