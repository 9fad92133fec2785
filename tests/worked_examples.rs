//! Published worked examples.
//!
//! Source: J. Meeus, Astronomical Algorithms, 2nd ed. (Willmann-Bell, 1998),
//! examples 12.a, 12.b, 47.a and 48.a. All values quoted from memory.

use rung::astro::site::Site;
use rung::astro::time::{DAY_S, Instant};

fn gmst_seconds_of_time(t: &Instant) -> f64 {
    t.gmst_rad().to_degrees() / 15.0 * 3600.0
}

fn hms(h: f64, m: f64, s: f64) -> f64 {
    h * 3600.0 + m * 60.0 + s
}

#[test]
fn gmst_meeus_example_12a() {
    // Meeus example 12.a (quoted from memory): 1987 April 10, 0h UT,
    // GMST = 13h10m46.3668s. UT1 = UTC here (DUT1 = 0). Meeus uses the IAU 1982
    // expression, rung SOFA gmst06 (IAU 2006); they differ by a few ms.
    let t = Instant::from_utc_calendar(1987, 4, 10, 0, 0, 0.0).unwrap();
    let got = gmst_seconds_of_time(&t);
    let want = hms(13.0, 10.0, 46.3668);
    eprintln!("12.a: GMST rung − Meeus = {:+.4} s", got - want);
    assert!(
        (got - want).abs() < 0.01,
        "GMST {got:.4} s of time, Meeus {want:.4} s"
    );
}

#[test]
fn gmst_meeus_example_12b() {
    // Meeus example 12.b (quoted from memory): 1987 April 10, 19h21m00s UT,
    // GMST = 8h34m57.0896s.
    let t = Instant::from_utc_calendar(1987, 4, 10, 19, 21, 0.0).unwrap();
    let got = gmst_seconds_of_time(&t);
    let want = hms(8.0, 34.0, 57.0896);
    eprintln!("12.b: GMST rung − Meeus = {:+.4} s", got - want);
    assert!(
        (got - want).abs() < 0.01,
        "GMST {got:.4} s of time, Meeus {want:.4} s"
    );
}

/// 1992 April 12, 0h TD (= TT) as a rung instant: UTC = TT − (TAI − UTC) − 32.184 s.
fn meeus_1992_april_12_0h_td() -> Instant {
    let guess = Instant::from_utc_calendar(1992, 4, 12, 0, 0, 0.0).unwrap();
    let (a, b) = guess.tt();
    let tt_minus_utc_s = ((a - guess.utc1) + (b - guess.utc2)) * DAY_S;
    // TAI − UTC was 26 s in April 1992 (IERS Bulletin C; fact of the trade).
    assert!((tt_minus_utc_s - 58.184).abs() < 1e-6);
    guess.add_seconds(-tt_minus_utc_s)
}

#[test]
fn moon_illuminated_fraction_meeus_example_48a() {
    // Meeus example 48.a (quoted from memory): 1992 April 12, 0h TD, phase angle
    // i = 69.0756°, illuminated fraction k = 0.6786.
    let t = meeus_1992_april_12_0h_td();
    let site = Site::new("geo", 0.0, 0.0, 0.0, chrono_tz::UTC).unwrap();
    let ctx = rung::astro::frames::Context::exact(&site, t).unwrap();
    let k = ctx.moon_illumination();
    assert!((k - 0.6786).abs() < 0.005, "k = {k:.5}, Meeus 0.6786");
    let i_deg = ctx.moon_phase_angle_rad().to_degrees();
    eprintln!("48.a: k = {k:.5}, i = {i_deg:.4}°");
    assert!(
        (i_deg - 69.0756).abs() < 0.3,
        "i = {i_deg:.4}°, Meeus 69.0756°"
    );
    assert!(ctx.moon_waxing(), "the Moon of 1992 April 12 was waxing");
}

#[test]
fn moon_distance_meeus_example_47a() {
    // Meeus example 47.a (quoted from memory): 1992 April 12, 0h TD, the Moon's
    // geocentric distance Δ = 368 409.7 km.
    let t = meeus_1992_april_12_0h_td();
    let site = Site::new("geo", 0.0, 0.0, 0.0, chrono_tz::UTC).unwrap();
    let ctx = rung::astro::frames::Context::exact(&site, t).unwrap();
    let d = ctx.moon_geo_distance_km();
    eprintln!("47.a: Δ = {d:.1} km");
    assert!(
        (d - 368_409.7).abs() < 20.0,
        "Δ = {d:.1} km, Meeus 368409.7 km"
    );
}
