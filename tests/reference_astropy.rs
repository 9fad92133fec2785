//! rung's Sun, Moon and Sun events against astropy.
//!
//! Sources: tests/reference/astropy_sun_moon.json and
//! tests/reference/astropy_events.json, written by
//! tests/reference/make_fixtures.py with astropy (built-in ephemeris: ERFA
//! `epv00` for the Earth and Sun, Meeus's ch. 47 series for the Moon; AltAz with
//! pressure 0, topocentric; DUT1 = 0 and no polar motion; versions recorded in
//! the files). The event times were found in the script on a 60 s grid of
//! astropy Sun altitudes from local noon to the next local noon in the site's
//! IANA zone, refined by cubic interpolation and checked against astropy. The
//! nights are the 21st of every month of 2026 at 12 sites from −60° to +70°,
//! plus 36 "marginal" nights at the sites beyond 50° when the Sun's lowest or
//! highest altitude comes within 0.2° of a threshold (the closest within
//! 0.0014°), where an event only just happens or only just fails to.

use chrono::NaiveDate;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::{Event, Night};
use rung::astro::pointing;
use rung::astro::site::Site;
use rung::astro::time::Instant;
use serde_json::Value;

const SUN_MOON: &str = include_str!("reference/astropy_sun_moon.json");
const EVENTS: &str = include_str!("reference/astropy_events.json");

fn f(v: &Value, k: &str) -> f64 {
    v[k].as_f64()
        .unwrap_or_else(|| panic!("fixture field {k} missing"))
}

#[test]
fn sun_and_moon_match_astropy() {
    let doc: Value = serde_json::from_str(SUN_MOON).expect("fixture is JSON");
    let cases = doc["cases"].as_array().expect("cases");
    assert!(cases.len() >= 100, "only {} cases", cases.len());
    // (error, description) of the worst case for Sun altitude, Moon altitude, illumination.
    let mut worst = [
        (0.0f64, String::new()),
        (0.0, String::new()),
        (0.0, String::new()),
    ];
    for (i, c) in cases.iter().enumerate() {
        let s = &c["site"];
        let site = Site::new(
            "fixture",
            f(s, "lat_deg"),
            f(s, "lon_deg"),
            f(s, "elev_m"),
            chrono_tz::UTC,
        )
        .expect("fixture site is valid");
        let t = Instant {
            utc1: f(c, "utc1"),
            utc2: f(c, "utc2"),
        };
        let ctx = Context::exact(&site, t).expect("context");
        let p = pointing(&site, &ctx, &CatalogPlace::fixed_deg(10.0, 20.0));
        let what = |name: &str, got: f64, want: f64| {
            format!(
                "case {i}: {name} rung {got:.6} astropy {want:.6} at lat {:.3}° lon {:.3}° {}",
                site.lat_deg,
                site.lon_deg,
                t.iso()
            )
        };
        let checks = [
            (
                p.sun_altitude_deg,
                f(c, "sun_alt_deg"),
                "Sun altitude (deg)",
            ),
            (
                p.moon_altitude_deg,
                f(c, "moon_alt_deg"),
                "Moon altitude (deg)",
            ),
            (
                p.moon_illumination,
                f(c, "moon_illumination"),
                "Moon illuminated fraction",
            ),
        ];
        for (k, (got, want, name)) in checks.into_iter().enumerate() {
            let e = (got - want).abs();
            if e > worst[k].0 || e.is_nan() {
                worst[k] = (e, what(name, got, want));
            }
        }
        // The same through the Context methods directly.
        assert_eq!(ctx.sun().alt_geom_rad.to_degrees(), p.sun_altitude_deg);
        assert_eq!(ctx.moon().alt_geom_rad.to_degrees(), p.moon_altitude_deg);
    }
    eprintln!(
        "worst: Sun altitude {:.5}°, Moon altitude {:.5}°, illumination {:.5}",
        worst[0].0, worst[1].0, worst[2].0
    );
    assert!(worst[0].0 < 0.005, "{:.5}°: {}", worst[0].0, worst[0].1);
    assert!(worst[1].0 < 0.02, "{:.5}°: {}", worst[1].0, worst[1].1);
    assert!(worst[2].0 < 0.005, "{:.5}: {}", worst[2].0, worst[2].1);
}

#[test]
fn sun_events_match_astropy() {
    let doc: Value = serde_json::from_str(EVENTS).expect("fixture is JSON");
    let sites: Vec<Site> = doc["sites"]
        .as_array()
        .expect("sites")
        .iter()
        .map(|s| {
            let tz: chrono_tz::Tz = s["timezone"]
                .as_str()
                .expect("zone")
                .parse()
                .expect("IANA zone");
            Site::new(
                s["name"].as_str().expect("name"),
                f(s, "lat_deg"),
                f(s, "lon_deg"),
                f(s, "elev_m"),
                tz,
            )
            .expect("site")
        })
        .collect();
    let lats: Vec<f64> = sites.iter().map(|s| s.lat_deg).collect();
    assert!(lats.iter().any(|l| *l <= -60.0) && lats.iter().any(|l| *l >= 70.0));
    let nights = doc["nights"].as_array().expect("nights");
    let mut worst = (0.0f64, String::new());
    let mut problems: Vec<String> = Vec::new();
    let (mut n_times, mut n_nulls) = (0, 0);
    for n in nights {
        let name = n["site"].as_str().expect("site");
        let site = sites.iter().find(|s| s.name == name).expect("known site");
        let date: NaiveDate = n["date"].as_str().expect("date").parse().expect("date");
        let night = Night::new(site, date).expect("night");
        let start_ref = f(n, "start_jd_utc");
        let ds = (night.start.jd_utc() - start_ref) * 86_400.0;
        assert!(
            ds.abs() < 0.01,
            "{name} {date}: local noon differs by {ds} s"
        );
        let e = night.events();
        let pairs: [(&str, &Event); 8] = [
            ("sunset", &e.sunset),
            ("sunrise", &e.sunrise),
            ("civil_dusk", &e.civil_dusk),
            ("civil_dawn", &e.civil_dawn),
            ("nautical_dusk", &e.nautical_dusk),
            ("nautical_dawn", &e.nautical_dawn),
            ("astronomical_dusk", &e.astronomical_dusk),
            ("astronomical_dawn", &e.astronomical_dawn),
        ];
        for (key, ev) in pairs {
            match (n[key].as_f64(), ev.t) {
                (Some(want), Some(got)) => {
                    n_times += 1;
                    // Both JDs near 2.46e6: f64 resolution ~40 µs, ample for a 30 s check.
                    let d = (got.utc1 - want + got.utc2) * 86_400.0;
                    if d.abs() > worst.0 {
                        worst = (
                            d.abs(),
                            format!(
                                "{name} (lat {}) {date} {key}: rung {} astropy {}",
                                site.lat_deg,
                                got.iso(),
                                n[format!("{key}_iso")].as_str().unwrap_or("?")
                            ),
                        );
                    }
                }
                (None, None) => n_nulls += 1,
                (Some(_), None) => problems.push(format!(
                    "{name} {date} {key}: astropy {} but rung none ({})",
                    n[format!("{key}_iso")].as_str().unwrap_or("?"),
                    ev.reason.clone().unwrap_or_default()
                )),
                (None, Some(got)) => problems.push(format!(
                    "{name} {date} {key}: astropy none but rung {}",
                    got.iso()
                )),
            }
        }
    }
    eprintln!(
        "{} nights: {n_times} event times compared, {n_nulls} agreed nulls, worst {:.2} s ({})",
        nights.len(),
        worst.0,
        worst.1
    );
    let n_marginal = nights.iter().filter(|n| n["marginal"] == true).count();
    assert!(
        nights.len() >= 12 * 12 && n_nulls >= 10 && n_marginal >= 30,
        "too few cases, nulls or marginal nights"
    );
    assert!(problems.is_empty(), "{}", problems.join("; "));
    assert!(worst.0 < 30.0, "{:.2} s: {}", worst.0, worst.1);
}
