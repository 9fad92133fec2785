//! The chase from discovery on, at the invented demo site `pampa-lucero`, with
//! invented targets, through a small documented test exposure model
//! (tests/transient_support).

mod transient_support;

use rung::astro::night::Limits;
use rung::io::targets::Kind;
use rung::ladder::transient::TransientMethod;
use rung::ladder::{Method, Verdict};
use transient_support::{TestPhotometer, chase_setting, method_at, site, transient};

fn run(
    t: &rung::io::targets::Target,
    limits: Limits,
    now: &str,
    goal: Option<f64>,
) -> rung::ladder::transient::Chase {
    let site = site();
    let s = chase_setting(&site, t, 60, limits);
    method_at(now).chase(&s, &TestPhotometer, goal).unwrap()
}

// Sun's right ascension in mid-November is about 15h20m (229°), declination
// about −18.5° (Astronomical Almanac tables, a fact of the trade): a target
// at RA 3h20m is at opposition, one at the Sun's place is in conjunction.

#[test]
fn target_in_its_best_months_gets_a_full_light_curve() {
    let t = transient("TEST-OPP", 50.0, -30.0, "2026-11-15T04:00:00Z", 18.3, 0.02);
    let c = run(
        &t,
        Limits::new(30.0, -12.0).unwrap(),
        "2026-11-15T12:00:00Z",
        Some(12.0),
    );
    let usable = c.nights.iter().filter(|n| n.usable).count();
    assert_eq!(c.nights.len(), 61);
    assert!(usable >= 55, "usable nights {usable}");
    assert!(c.observable_at_horizon, "still up two months later");
    let f = c.design.fit.expect("the curve is measured");
    assert!(f.sigma_dm15 < 0.1 && f.sigma_peak_mag < 0.05, "{f:?}");
    // Epochs bracket the maximum and reach the decline.
    let tmax = c.placement.params.t_max_mjd;
    let ts: Vec<f64> = c.design.epochs.iter().map(|e| e.time.mjd_utc()).collect();
    assert!(ts.iter().any(|t| *t < tmax) && ts.iter().any(|t| *t > tmax + 15.0));
    assert!(
        matches!(c.verdict, Verdict::Reachable),
        "{:?} {:?}",
        c.verdict,
        c.notes
    );
    assert!(c.design.meets_goal);
    // The chosen cadence is sparser than every night but costs fewer hours.
    assert!(
        c.design.cadence_days >= 2,
        "cadence {}",
        c.design.cadence_days
    );
    // A 12 % goal at z = 0.02: floor σ_μ = sqrt(0.14² + 0.05² + 0.1087²) = 0.184 mag → 8.5 %.
    let b = c.design.budget.unwrap();
    assert!((b.floor_pct - 8.48).abs() < 0.1, "floor {}", b.floor_pct);
    assert!(b.distance_precision_pct <= 12.0);
    assert!(c.cautions.is_empty());
    // Expected magnitudes: brighter at maximum than at discovery, fainter 30 d after.
    let mag_at = |d: f64| {
        c.nights
            .iter()
            .filter_map(|n| Some((n.phase_days?, n.expected_mag?)))
            .min_by(|a, b| (a.0 - d).abs().total_cmp(&(b.0 - d).abs()))
            .unwrap()
            .1
    };
    assert!(mag_at(0.0) < 18.3 && mag_at(30.0) > mag_at(0.0) + 1.5);
}

#[test]
fn target_near_solar_conjunction_gets_few_or_no_nights_and_says_so() {
    let t = transient(
        "TEST-CONJ",
        229.0,
        -18.5,
        "2026-11-15T04:00:00Z",
        18.0,
        0.02,
    );
    let c = run(
        &t,
        Limits::new(30.0, -12.0).unwrap(),
        "2026-11-15T12:00:00Z",
        Some(12.0),
    );
    let usable = c.nights.iter().filter(|n| n.usable).count();
    // It emerges from behind the Sun only in the last dozen nights, long after maximum.
    assert!(usable <= 15, "usable nights {usable}");
    let tmax = c.placement.params.t_max_mjd;
    assert!(
        c.nights
            .iter()
            .filter(|n| n.usable)
            .all(|n| n.epoch_time.unwrap().mjd_utc() > tmax + 20.0)
    );
    assert!(
        matches!(c.verdict, Verdict::NotObservable { .. }),
        "{:?}",
        c.verdict
    );
    assert!(
        c.notes.iter().any(|n| n.contains("the peak is missed")),
        "{:?}",
        c.notes
    );
    // The first nights say why: solar elongation.
    assert!(
        c.nights[0]
            .reason
            .as_deref()
            .unwrap_or("")
            .contains("elongation")
    );
    assert!(c.nights[0].solar_elongation_deg < 20.0);
}

#[test]
fn target_setting_into_the_sun_gets_no_nights_and_says_so() {
    // 20° east of the Sun in the evening sky: the Sun gains about 1° a day on it.
    let t = transient("TEST-EVE", 249.0, -21.0, "2026-11-15T00:00:00Z", 17.5, 0.02);
    let c = run(
        &t,
        Limits::new(30.0, -12.0).unwrap(),
        "2026-11-15T12:00:00Z",
        Some(12.0),
    );
    let usable = c.nights.iter().filter(|n| n.usable).count();
    assert!(usable <= 3, "usable nights {usable}");
    assert!(matches!(c.verdict, Verdict::NotObservable { .. }));
    assert!(c.design.fit.is_none());
    assert!(
        c.notes
            .iter()
            .any(|n| n.contains("not observable on any") || n.contains("Sun takes")),
        "{:?}",
        c.notes
    );
}

#[test]
fn twilight_pointing_near_the_sun_raises_a_caution() {
    // 35° east of the Sun, observed in the evening right after sunset with the
    // Sun limit at 0°: the window opens while the Sun's centre is still above
    // the sunrise/sunset altitude... or just below it; with the site limit of
    // 45° the start of the window is within the Sun-avoidance angle while the
    // Sun is up (−0°50′ < Sun altitude ≤ 0°).
    let t = transient(
        "TEST-DUSK",
        264.0,
        -24.0,
        "2026-11-15T04:00:00Z",
        17.0,
        0.02,
    );
    let c = run(
        &t,
        Limits::new(5.0, 0.0).unwrap(),
        "2026-11-15T12:00:00Z",
        None,
    );
    let n = c.nights.iter().filter(|n| !n.cautions.is_empty()).count();
    assert!(n > 0, "no night with a caution: {:?}", c.notes);
    assert!(!c.cautions.is_empty());
    assert!(
        c.cautions
            .iter()
            .any(|s| s.contains("SUN CAUTION") || s.contains("within"))
    );
    assert!(c.notes.iter().any(|s| s.contains("safety officers")));
}

#[test]
fn bad_input_is_refused_with_a_clear_message() {
    let site = site();
    let t = transient("TEST-OPP", 50.0, -30.0, "2026-11-15T04:00:00Z", 18.3, 0.02);
    // Discovery after "now".
    let m = method_at("2026-11-10T00:00:00Z");
    let e = m
        .propose(
            &chase_setting(&site, &t, 20, Limits::default()),
            &TestPhotometer,
        )
        .unwrap_err()
        .to_string();
    assert!(e.contains("discover") && e.contains("future"), "{e}");
    // Negative redshift.
    let m = TransientMethod::new().unwrap();
    let mut bad = t.clone();
    bad.redshift = Some(-0.01);
    let e = m
        .propose(
            &chase_setting(&site, &bad, 20, Limits::default()),
            &TestPhotometer,
        )
        .unwrap_err()
        .to_string();
    assert!(e.contains("redshift"), "{e}");
    // Unknown band, and a known band without a standardization.
    let mut bad = t.clone();
    bad.band = "Q".into();
    let e = m
        .propose(
            &chase_setting(&site, &bad, 20, Limits::default()),
            &TestPhotometer,
        )
        .unwrap_err()
        .to_string();
    assert!(e.contains("unknown band 'Q'"), "{e}");
    let mut bad = t.clone();
    bad.band = "I".into();
    let e = m
        .propose(
            &chase_setting(&site, &bad, 20, Limits::default()),
            &TestPhotometer,
        )
        .unwrap_err()
        .to_string();
    assert!(e.contains("defined for B only"), "{e}");
    // Not a transient.
    let mut bad = t.clone();
    bad.kind = Kind::Parallax;
    let e = m
        .propose(
            &chase_setting(&site, &bad, 20, Limits::default()),
            &TestPhotometer,
        )
        .unwrap_err()
        .to_string();
    assert!(e.contains("not a transient"), "{e}");
}

#[test]
fn predict_agrees_with_the_chase_design() {
    let site = site();
    let t = transient("TEST-OPP", 50.0, -30.0, "2026-11-15T04:00:00Z", 18.3, 0.02);
    let s = chase_setting(&site, &t, 60, Limits::new(30.0, -12.0).unwrap());
    let m = TransientMethod::new().unwrap();
    let g = m.goal(&s, &TestPhotometer, 12.0).unwrap();
    let p = m.predict(&s, &TestPhotometer, &g.epochs).unwrap();
    assert!((p.distance_precision_pct - g.distance_precision_pct).abs() < 1e-9);
    assert!((p.hours_needed - g.hours_needed).abs() < 1e-9);
    assert_eq!(m.kind(), Kind::Transient);
    // Fewer epochs cost precision.
    let half: Vec<_> = g.epochs.iter().step_by(2).cloned().collect();
    let q = m.predict(&s, &TestPhotometer, &half).unwrap();
    assert!(q.distance_precision_pct >= p.distance_precision_pct);
}

#[test]
fn the_demo_photometer_gives_a_full_curve_at_opposition() {
    // The same chase through the real photometry model (invented demo
    // instrument): exposures are positive, grow as the supernova fades, and
    // the curve is measured.
    let site = site();
    let ph = rung::photometry::Photometer::demo(&site).unwrap();
    let t = transient("TEST-OPP", 50.0, -30.0, "2026-11-15T04:00:00Z", 18.3, 0.02);
    let s = chase_setting(&site, &t, 60, Limits::new(30.0, -12.0).unwrap());
    let m = TransientMethod::new().unwrap();
    let c = m.chase(&s, &ph, Some(12.0)).unwrap();
    assert!(c.nights.iter().filter(|n| n.usable).count() >= 50);
    let f = c.design.fit.expect("measured");
    assert!(f.sigma_dm15 < 0.1);
    let exp_at = |d: f64| {
        c.nights
            .iter()
            .filter(|n| n.usable)
            .min_by(|a, b| {
                (a.phase_days.unwrap() - d)
                    .abs()
                    .total_cmp(&(b.phase_days.unwrap() - d).abs())
            })
            .and_then(|n| n.exptime_s)
            .unwrap()
    };
    assert!(exp_at(0.0) > 0.0 && exp_at(40.0) > 3.0 * exp_at(0.0));
}
