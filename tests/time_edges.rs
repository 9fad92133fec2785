//! Edges of time: rung's valid span, the day of a leap second, and nights
//! that contain a daylight-saving change in the site's zone.

use chrono::NaiveDate;
use rung::RungError;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::{Event, Limits, Night, SUN_RISE_SET_DEG, local_noon};
use rung::astro::site::Site;
use rung::astro::time::{Instant, VALID_FROM_JD, VALID_TO_JD, parse_date, parse_instant};
use rung::io::targets::parse_csv;
use std::path::Path;

fn site(lat: f64, lon: f64, zone: &str) -> Site {
    Site::new("edge", lat, lon, 600.0, zone.parse().unwrap()).unwrap()
}

fn d(s: &str) -> NaiveDate {
    s.parse().unwrap()
}

fn out_of_span<T>(r: rung::Result<T>) -> String {
    match r {
        Err(e @ RungError::OutOfSpan { .. }) => e.to_string(),
        Err(e) => panic!("expected an out-of-span error, got {e}"),
        Ok(_) => panic!("expected an out-of-span error, got a result"),
    }
}

/// A sidereal day is 23 h 56 min 4.0905 s of UT (fact of the trade).
const SIDEREAL_DAY_S: f64 = 86_164.090_5;

/// The Sun's exact altitude (full SOFA chain, `Context::exact`) crosses the
/// sunrise/sunset altitude within 2 s of the reported event.
fn check_sun_event(s: &Site, e: &Event, rising: bool) {
    let t = e.t.expect("event happens");
    let alt = |dt: f64| {
        Context::exact(s, t.add_seconds(dt))
            .unwrap()
            .sun()
            .alt_geom_rad
            .to_degrees()
            - SUN_RISE_SET_DEG
    };
    let (before, after) = (alt(-2.0), alt(2.0));
    if rising {
        assert!(before < 0.0 && after > 0.0, "{}: {before} {after}", t.iso());
    } else {
        assert!(before > 0.0 && after < 0.0, "{}: {before} {after}", t.iso());
    }
}

/// Seconds after 0h UTC of an instant's day.
fn utc_time_of_day_s(t: Instant) -> f64 {
    t.utc2 * 86_400.0
}

#[test]
fn instants_outside_the_span_are_refused_everywhere() {
    // parse_instant: the first and last accepted seconds, and one either side.
    assert!(parse_instant("1960-01-01T00:00:00Z").is_ok());
    assert!(parse_instant("2099-12-31T23:59:59Z").is_ok());
    let m = out_of_span(parse_instant("1959-12-31T23:59:59Z"));
    assert!(
        m.contains("1959-12-31") && m.contains("1960-01-01 to 2099-12-31"),
        "{m}"
    );
    out_of_span(parse_instant("2100-01-01T00:00:00Z"));
    out_of_span(parse_instant("1066-10-14T09:00:00Z"));
    // parse_date: the date itself must lie in the span.
    assert!(parse_date("2099-12-31").is_ok());
    out_of_span(parse_date("2100-01-01"));
    out_of_span(parse_date("1959-12-31"));
    // Night::new: the night of the last day ends past the span.
    let s = site(-30.0, -70.0, "America/Santiago");
    let m = out_of_span(Night::new(&s, d("2099-12-31")));
    assert!(m.contains("the night of 2099-12-31"), "{m}");
    assert!(Night::new(&s, d("2099-12-30")).is_ok());
    assert!(Night::new(&s, d("1960-01-01")).is_ok());
    // A zone more than 12 h ahead of UTC (Chatham Islands, +12:45 in 1960 by
    // IANA tzdata) puts the first local noon of 1960 before the span.
    let east = site(-43.95, -176.56, "Pacific/Chatham");
    out_of_span(Night::new(&east, d("1960-01-01")));
    // Context::exact refuses instants that SOFA apco13 would panic on
    // (epv00 has no answer outside 1900-2100), however they were built.
    for bad in [
        Instant {
            utc1: 2_400_000.5,
            utc2: 0.0,
        },
        Instant {
            utc1: 2_600_000.5,
            utc2: 0.25,
        },
        Instant {
            utc1: f64::NAN,
            utc2: 0.0,
        },
        Instant {
            utc1: f64::INFINITY,
            utc2: 0.0,
        },
        Instant::from_jd_utc(VALID_TO_JD - 0.5)
            .unwrap()
            .add_seconds(86_400.0 * 400.0),
    ] {
        out_of_span(Context::exact(&s, bad));
    }
    assert!(Instant::from_jd_utc(VALID_FROM_JD - 1e-6).is_err());
    // Target epochs.
    let csv = "name,ra,dec,kind,epoch_yr,period_d,epoch_max_bjd,discovered,peak_mag\n\
        A,1,2,plain,1950.0,,,,\n\
        B,1,2,pulsator,,5.3,2430000.5,,\n\
        C,1,2,transient,,,,1959-06-01T00:00:00Z,15\n\
        D,1,2,pulsator,2016.0,5.3,2461000.5,,\n";
    let l = parse_csv(csv, Path::new("t.csv"));
    assert_eq!(l.targets.len(), 1, "{:?}", l.problems);
    let msgs: Vec<String> = l.problems.iter().map(|p| p.to_string()).collect();
    assert!(
        msgs[0].contains("epoch_yr") && msgs[0].contains("1960.0 to 2100.0"),
        "{}",
        msgs[0]
    );
    assert!(
        msgs[1].contains("epoch_max_bjd") && msgs[1].contains("valid span"),
        "{}",
        msgs[1]
    );
    assert!(
        msgs[2].contains("discovered") && msgs[2].contains("outside rung's valid span"),
        "{}",
        msgs[2]
    );
}

#[test]
fn the_day_of_a_leap_second() {
    // A leap second was inserted at the end of 2016-12-31 (IERS Bulletin C 52;
    // fact of the trade): 23:59:60 exists that day and not on 2017-12-31.
    let leap = parse_instant("2016-12-31T23:59:60Z").unwrap();
    assert_eq!(leap.iso(), "2016-12-31T23:59:60Z");
    for no_such_second in [
        "2017-12-31T23:59:60Z",
        "2016-12-31T23:58:60Z",
        "2016-12-31T23:59:61Z",
        "2016-06-30T23:59:60Z",
    ] {
        let e = parse_instant(no_such_second).unwrap_err().to_string();
        assert!(
            e.contains("does not exist") || e.contains("cannot read"),
            "{e}"
        );
    }
    // 2015-06-30 did end with a leap second (IERS Bulletin C 49; fact of the trade).
    assert!(parse_instant("2015-06-30T23:59:60.25Z").is_ok());
    // A site on UTC: the night of 2016-12-31 runs noon to noon over 86 401 SI seconds.
    let s = site(51.48, 0.0, "UTC");
    let n = Night::new(&s, d("2016-12-31")).unwrap();
    assert_eq!(n.start.iso(), "2016-12-31T12:00:00Z");
    assert_eq!(n.end.iso(), "2017-01-01T12:00:00Z");
    assert!((n.end.seconds_since(&n.start) - 86_401.0).abs() < 1e-3);
    assert_eq!(n.times.last().unwrap().iso(), n.end.iso());
    let e = n.events();
    check_sun_event(&s, &e.sunset, false);
    check_sun_event(&s, &e.sunrise, true);
    // Events move smoothly through the leap second: sunset on 31 December and
    // sunrise on 1 January are within 2 minutes (UTC time of day) of the
    // neighbouring days' (they change by about a minute a day then; common practice).
    for (a, b) in [("2016-12-30", "2016-12-31"), ("2016-12-31", "2017-01-01")] {
        let ea = Night::new(&s, d(a)).unwrap().events();
        let eb = Night::new(&s, d(b)).unwrap().events();
        for (x, y) in [(&ea.sunset, &eb.sunset), (&ea.sunrise, &eb.sunrise)] {
            let dt = utc_time_of_day_s(y.t.unwrap()) - utc_time_of_day_s(x.t.unwrap());
            assert!(dt.abs() < 120.0, "{a} -> {b}: {dt} s");
        }
    }
    // A star transits one sidereal day later each night; across the leap
    // second rung's model (DUT1 = 0) adds that second, inside the 3 s allowed.
    let star = CatalogPlace::fixed_deg(100.0, 20.0);
    let t0 = Night::new(&s, d("2016-12-30"))
        .unwrap()
        .target(&star, &Limits::default());
    let t1 = n.target(&star, &Limits::default());
    let dt = t1.transit.t.unwrap().seconds_since(&t0.transit.t.unwrap());
    assert!((dt - SIDEREAL_DAY_S).abs() < 3.0, "{dt}");
}

/// The night of `date` contains a clock change: it lasts `hours`, its events
/// agree with the exact SOFA chain, sunrise keeps its UTC time of day while
/// its clock time jumps by `clock_jump_min`, and a star still transits a
/// sidereal day after the previous night's transit.
fn check_dst_night(s: &Site, date: &str, hours: f64, clock_jump_min: f64, star_ra_deg: f64) {
    let day = d(date);
    let n = Night::new(s, day).unwrap();
    let span_h = n.end.seconds_since(&n.start) / 3600.0;
    assert!((span_h - hours).abs() < 1e-6, "{date}: {span_h} h");
    // Still local noon to local noon.
    for t in [n.start, n.end] {
        assert_eq!(
            t.local(&s.timezone).format("%H:%M:%S").to_string(),
            "12:00:00"
        );
    }
    assert_eq!(n.start, local_noon(s, day).unwrap());
    let e = n.events();
    check_sun_event(s, &e.sunset, false);
    check_sun_event(s, &e.sunrise, true);
    let prev = Night::new(s, day.pred_opt().unwrap()).unwrap();
    let ep = prev.events();
    let utc_shift =
        utc_time_of_day_s(e.sunrise.t.unwrap()) - utc_time_of_day_s(ep.sunrise.t.unwrap());
    assert!(
        utc_shift.abs() < 180.0,
        "{date}: sunrise moved {utc_shift} s in UTC"
    );
    let clock = |t: Instant| {
        let l = t.local(&s.timezone);
        use chrono::Timelike;
        l.hour() as f64 * 60.0 + l.minute() as f64 + l.second() as f64 / 60.0
    };
    let jump = clock(e.sunrise.t.unwrap()) - clock(ep.sunrise.t.unwrap());
    assert!(
        (jump - clock_jump_min).abs() < 3.0,
        "{date}: clock jump {jump} min"
    );
    let star = CatalogPlace::fixed_deg(star_ra_deg, -20.0);
    let a = prev.target(&star, &Limits::default()).transit.t.unwrap();
    let b = n.target(&star, &Limits::default()).transit.t.unwrap();
    let dt = b.seconds_since(&a);
    assert!(
        (dt - SIDEREAL_DAY_S).abs() < 2.0,
        "{date}: transits {dt} s apart"
    );
}

#[test]
fn nights_with_a_dst_change_in_madrid() {
    // IANA tzdata rule for Europe/Madrid (EU): clocks go forward at 02:00 on
    // the last Sunday of March and back at 03:00 on the last Sunday of October.
    let s = site(38.47, -4.16, "Europe/Madrid");
    check_dst_night(&s, "2026-03-28", 23.0, 60.0, 185.0);
    check_dst_night(&s, "2026-10-24", 25.0, -60.0, 35.0);
}

#[test]
fn nights_with_a_dst_change_in_santiago() {
    // IANA tzdata rule for America/Santiago: clocks go back at 24:00 on the
    // first Saturday of April and forward at 24:00 on the first Saturday of
    // September (2026: 4 April and 5 September).
    let s = site(-33.45, -70.67, "America/Santiago");
    check_dst_night(&s, "2026-04-04", 25.0, -60.0, 195.0);
    check_dst_night(&s, "2026-09-05", 23.0, 60.0, 345.0);
}
