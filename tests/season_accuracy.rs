//! The season engine against a brute-force reference: the full SOFA chain
//! (`Context::exact`, i.e. SOFA `apco13` + `atciq`/`atioq`, Sun from `epv00`,
//! Moon from `moon98`) evaluated at the middle of every minute of the night,
//! a minute counting as observable when the observed altitude is above the
//! limit and the horizon mask, the Sun's centre below its limit and the Moon's
//! centre farther than its limit. Observable hours must agree within 5 minutes
//! for every target-night of a mixed catalogue (circumpolar, never rising,
//! grazing the altitude limit, near the Moon, behind a horizon mask, at a
//! high-latitude site in summer with little or no darkness).

use chrono::NaiveDate;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::local_noon;
use rung::astro::site::{HorizonPoint, Site};
use rung::plan::season::{self, Constraints, TargetNightRow};
use std::ops::ControlFlow;

/// Allowed difference in observable hours (the requirement: 5 minutes).
const TOL_H: f64 = 5.0 / 60.0;

struct Case {
    label: &'static str,
    site: Site,
    from: NaiveDate,
    to: NaiveDate,
    c: Constraints,
    targets: Vec<(String, CatalogPlace)>,
}

#[derive(Debug, Clone, Copy, Default)]
struct Brute {
    minutes: u32,
    minutes_no_moon: u32,
    minutes_no_mask: u32,
    max_alt_deg: Option<f64>,
    min_moon_sep_deg: Option<f64>,
}

fn date(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

fn brute_force(case: &Case, d: NaiveDate) -> Vec<Brute> {
    let start = local_noon(&case.site, d).unwrap();
    let end = local_noon(&case.site, d.succ_opt().unwrap()).unwrap();
    let n = (end.seconds_since(&start) / 60.0).round() as usize;
    let mut out = vec![Brute::default(); case.targets.len()];
    for m in 0..n {
        let t = start.add_seconds(60.0 * m as f64 + 30.0);
        let ctx = Context::exact(&case.site, t).unwrap();
        let sun = ctx.sun();
        if sun.alt_geom_rad.to_degrees() >= case.c.sun_alt_deg {
            continue;
        }
        let moon = ctx.moon();
        for (b, (_, p)) in out.iter_mut().zip(&case.targets) {
            let o = ctx.observe(p);
            let alt = o.alt_rad.to_degrees();
            if alt < case.c.min_alt_deg {
                continue;
            }
            let sep = o.separation_rad(&moon).to_degrees();
            let moon_ok = sep >= case.c.moon_sep_deg;
            let mask_ok = alt >= case.site.horizon_alt_deg(o.az_rad.to_degrees());
            if mask_ok {
                b.minutes_no_moon += 1;
            }
            if moon_ok {
                b.minutes_no_mask += 1;
            }
            if mask_ok && moon_ok {
                b.minutes += 1;
                b.max_alt_deg = Some(b.max_alt_deg.map_or(alt, |x: f64| x.max(alt)));
                b.min_moon_sep_deg = Some(b.min_moon_sep_deg.map_or(sep, |x: f64| x.min(sep)));
            }
        }
    }
    out
}

fn fast(case: &Case) -> Vec<Vec<TargetNightRow>> {
    let places: Vec<CatalogPlace> = case.targets.iter().map(|t| t.1).collect();
    let mut nights = Vec::new();
    season::scan(&case.site, &places, case.from, case.to, &case.c, |nr| {
        nights.push(nr.rows.to_vec());
        ControlFlow::Continue(())
    })
    .unwrap();
    nights
}

/// The Moon's geocentric direction at the middle of a night, as RA/Dec degrees
/// (GCRS, within 20″ of ICRS), from SOFA `moon98` through `Context`.
fn moon_radec_deg(site: &Site, d: NaiveDate) -> (f64, f64) {
    let a = local_noon(site, d).unwrap();
    let t = a.add_seconds(12.0 * 3600.0);
    let p = Context::exact(site, t).unwrap().moon_geo_pv()[0];
    let (ra, dec) = sofars::vm::c2s(&p);
    (sofars::vm::anp(ra).to_degrees(), dec.to_degrees())
}

fn fixed(name: &str, ra: f64, dec: f64) -> (String, CatalogPlace) {
    (name.to_string(), CatalogPlace::fixed_deg(ra, dec))
}

/// Targets placed at given separations east and west of the Moon's mid-night place.
fn near_moon(site: &Site, d: NaiveDate, sep: f64) -> Vec<(String, CatalogPlace)> {
    let (ra, dec) = moon_radec_deg(site, d);
    let cd = dec.to_radians().cos();
    let mut v = Vec::new();
    for (i, x) in [-4.0, -1.0, 0.5, 2.0, 4.0].iter().enumerate() {
        v.push(fixed(&format!("moon-east-{i}"), ra + (sep + x) / cd, dec));
        v.push(fixed(&format!("moon-west-{i}"), ra - (sep + x) / cd, dec));
        v.push(fixed(
            &format!("moon-north-{i}"),
            ra,
            (dec + sep + x).min(89.0),
        ));
    }
    v
}

fn cases() -> Vec<Case> {
    let tz = |s: &str| s.parse().unwrap();
    // A southern mid-latitude site (invented) with a wall in the east and a
    // notch in the west standing above the altitude limit.
    let mut south = Site::new(
        "test-south",
        -27.4521,
        -68.0237,
        3120.0,
        tz("America/Argentina/Catamarca"),
    )
    .unwrap();
    south.temperature_c = 6.0;
    south.humidity = 0.25;
    south.horizon = [
        (0.0, 5.0),
        (50.0, 6.0),
        (70.0, 38.0),
        (110.0, 38.0),
        (130.0, 6.0),
        (240.0, 8.0),
        (250.0, 28.0),
        (262.0, 8.0),
    ]
    .iter()
    .map(|&(az_deg, alt_deg)| HorizonPoint { az_deg, alt_deg })
    .collect();
    let south = south.validated().unwrap();
    let phi = south.lat_deg;
    let min_alt = 20.0;
    let d0 = date("2026-03-01");
    let mut st = vec![
        fixed("circumpolar", 40.0, -85.0),
        fixed("never-rises", 120.0, 70.0),
        // Upper culmination due north at min_alt + 0.4° and min_alt − 0.3°.
        fixed("grazing-above", 150.0, phi + 90.0 - (min_alt + 0.4)),
        fixed("grazing-below", 160.0, phi + 90.0 - (min_alt - 0.3)),
        // Upper culmination at the zenith.
        fixed("zenith", 200.0, phi),
    ];
    for k in 0..8 {
        st.push(fixed(&format!("ring-{k}"), 45.0 * k as f64 + 7.0, -40.0));
        st.push(fixed(&format!("equator-{k}"), 45.0 * k as f64 + 20.0, 2.0));
    }
    st.push((
        "moving".to_string(),
        CatalogPlace {
            ra_rad: 140.0f64.to_radians(),
            dec_rad: (-15.0f64).to_radians(),
            pm_ra_rad_yr: (2.0f64 / 3600.0).to_radians(),
            pm_dec_rad_yr: (-1.5f64 / 3600.0).to_radians(),
            parallax_arcsec: 0.3,
            rv_kms: 20.0,
        },
    ));
    st.extend(near_moon(&south, date("2026-03-02"), 25.0));

    // A high-latitude northern site in summer.
    let north_hi = Site::new("test-north", 59.5, 17.6, 40.0, tz("Europe/Stockholm")).unwrap();
    let mut nt = vec![
        fixed("polar", 10.0, 80.0),
        fixed("never-rises", 10.0, -50.0),
        fixed("grazing", 300.0, 90.0 - 59.5 - 10.3),
    ];
    for k in 0..6 {
        nt.push(fixed(&format!("ring-{k}"), 60.0 * k as f64, 35.0));
    }

    // A northern mid-latitude site near full Moon.
    let mid = Site::new("test-mid", 38.4713, -4.1622, 1710.0, tz("Europe/Madrid")).unwrap();
    let dm = date("2026-09-25");
    let mut mt = near_moon(&mid, dm, 40.0);
    mt.push(fixed("pole", 0.0, 88.0));
    mt.push(fixed("south-low", 30.0, 38.4713 - 90.0 + 25.5));

    vec![
        Case {
            label: "southern site, horizon mask, Moon 25°",
            site: south,
            from: d0,
            to: date("2026-03-05"),
            c: Constraints::new(min_alt, -18.0, Some(25.0)).unwrap(),
            targets: st,
        },
        Case {
            label: "59.5°N at the June solstice, Sun below −6° (short night)",
            site: north_hi.clone(),
            from: date("2026-06-20"),
            to: date("2026-06-20"),
            c: Constraints::new(10.0, -6.0, None).unwrap(),
            targets: nt.clone(),
        },
        Case {
            label: "59.5°N at the June solstice, Sun below −18° (no astronomical darkness)",
            site: north_hi,
            from: date("2026-06-21"),
            to: date("2026-06-21"),
            c: Constraints::new(10.0, -18.0, None).unwrap(),
            targets: nt,
        },
        Case {
            label: "northern mid-latitude site, the night clocks go back (25 h)",
            site: mid.clone(),
            from: date("2026-10-24"),
            to: date("2026-10-24"),
            c: Constraints::new(25.0, -12.0, Some(40.0)).unwrap(),
            targets: mt.clone(),
        },
        Case {
            label: "northern mid-latitude site near full Moon, Moon 40°",
            site: mid,
            from: dm,
            to: date("2026-09-26"),
            c: Constraints::new(25.0, -12.0, Some(40.0)).unwrap(),
            targets: mt,
        },
    ]
}

#[test]
fn observable_hours_match_the_full_sofa_chain_at_one_minute_steps() {
    let mut worst_h: f64 = 0.0;
    let mut worst_airmass: f64 = 0.0;
    let mut worst_moon: f64 = 0.0;
    let mut checked = 0;
    let (mut moon_bites, mut mask_bites, mut empty, mut full) = (0, 0, 0, 0);
    for case in cases() {
        let fast_nights = fast(&case);
        let dates: Vec<NaiveDate> = case.from.iter_days().take(fast_nights.len()).collect();
        for (rows, d) in fast_nights.iter().zip(&dates) {
            let brute = brute_force(&case, *d);
            for ((r, b), (name, _)) in rows.iter().zip(&brute).zip(&case.targets) {
                let bh = b.minutes as f64 / 60.0;
                let diff = (r.observable_hours - bh).abs();
                worst_h = worst_h.max(diff);
                assert!(
                    diff <= TOL_H,
                    "{}: {name} on {d}: season {:.4} h, brute force {:.4} h",
                    case.label,
                    r.observable_hours,
                    bh
                );
                checked += 1;
                if b.minutes_no_moon > b.minutes + 5 {
                    moon_bites += 1;
                }
                if b.minutes_no_mask > b.minutes + 5 {
                    mask_bites += 1;
                }
                if b.minutes == 0 {
                    empty += 1;
                    assert_eq!(
                        r.best_airmass, None,
                        "{name} on {d}: airmass without window"
                    );
                }
                if b.minutes >= 10 {
                    full += 1;
                    // Highest altitude: the engine's is the true maximum inside the
                    // window, the minute grid's can only be lower, by at most the
                    // altitude change over one minute at a window edge (at most
                    // 0.25°/min, the sidereal rate, for any star at any site).
                    let ba = b.max_alt_deg.unwrap();
                    let fa = r.max_altitude_deg.unwrap();
                    assert!(
                        fa >= ba - 0.01 && fa - ba < 0.26,
                        "{name} on {d}: max altitude {fa} vs {ba}"
                    );
                    // Best airmass is Kasten & Young (1989) at that altitude.
                    let ka = rung::astro::airmass::kasten_young(ba).unwrap();
                    let rel = (r.best_airmass.unwrap() - ka).abs() / ka;
                    worst_airmass = worst_airmass.max(rel);
                    let dm =
                        (r.moon_separation_min_deg.unwrap() - b.min_moon_sep_deg.unwrap()).abs();
                    worst_moon = worst_moon.max(dm);
                    assert!(dm < 0.3, "{name} on {d}: Moon separation differs by {dm}°");
                    if case.c.moon_sep_deg > 0.0 {
                        assert!(r.moon_separation_min_deg.unwrap() >= case.c.moon_sep_deg - 0.01);
                    }
                }
            }
        }
    }
    eprintln!(
        "season accuracy: {checked} target-nights, worst |Δhours| = {:.2} min, worst airmass {:.3} %, worst Moon separation {:.3}°",
        worst_h * 60.0,
        worst_airmass * 100.0,
        worst_moon
    );
    // The catalogue exercises what it claims to.
    assert!(
        moon_bites >= 3,
        "the Moon limit cut only {moon_bites} windows"
    );
    assert!(
        mask_bites >= 3,
        "the horizon mask cut only {mask_bites} windows"
    );
    assert!(empty >= 5 && full >= 20, "empty {empty}, observable {full}");
}

#[test]
fn transit_matches_the_full_chain() {
    // Upper transit where the full chain's hour angle passes through zero
    // (SOFA atioq hour angle), checked to within 2 seconds.
    let case = &cases()[4];
    let rows = &fast(case)[0];
    let start = local_noon(&case.site, case.from).unwrap();
    let mid = start.add_seconds(
        local_noon(&case.site, case.from.succ_opt().unwrap())
            .unwrap()
            .seconds_since(&start)
            / 2.0,
    );
    for (r, (name, p)) in rows.iter().zip(&case.targets) {
        let ts = r.transit_s.expect("every target transits once in 24 h");
        let t = mid.add_seconds(ts);
        let ha = |t| Context::exact(&case.site, t).unwrap().observe(p).ha_rad;
        let h0 = ha(t.add_seconds(-2.0));
        let h1 = ha(t.add_seconds(2.0));
        assert!(
            h0 < 0.0 && h1 > 0.0,
            "{name}: hour angle {h0} .. {h1} around transit"
        );
    }
}
