//! Phase arithmetic, phase uncertainty and the single-site beat period on
//! constructed cases, with the expectations derived by hand beside each; and
//! bad input.

use rung::astro::bary::Bjd;
use rung::io::targets::{Kind, Target};
use rung::ladder::pulsator::{Ephemeris, Star, day_alias, frac_phase};

const E0: f64 = 2_461_000.0;

fn eph(p: f64, sp: f64) -> Ephemeris {
    Ephemeris::new(Some(p), Some(E0), Some(sp)).unwrap()
}

fn at(days: f64) -> Bjd {
    Bjd { jd1: E0, jd2: days }
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() < tol
}

#[test]
fn period_1_0_d() {
    // By hand: 3.25 d after E0 is 3.25 cycles, phase 0.25; 0.25 d before E0 is
    // −0.25 cycles, phase 0.75. σ_P = 0.001 d: σ_φ = 3.25 × 0.001 / 1.0 = 0.00325.
    let e = eph(1.0, 0.001);
    assert!(close(e.phase(&at(3.25)), 0.25, 1e-12));
    assert!(close(e.phase(&at(-0.25)), 0.75, 1e-12));
    assert!(close(e.phase_sigma(&at(3.25)), 0.00325, 1e-12));
    assert!(close(e.timing_sigma_d(&at(3.25)), 0.00325, 1e-12));
    // By hand: 1/P = 1 cycle per day = 1/1 exactly: the same phase every night,
    // no drift, no finite beat period.
    let a = day_alias(1.0, 2);
    assert_eq!((a.m, a.k), (1, 1));
    assert_eq!(a.beat_period_d, None);
}

#[test]
fn period_0_5_d() {
    // By hand: 1.1 d = 2.2 cycles → phase 0.2; −0.1 d = −0.2 cycles → phase 0.8.
    let e = eph(0.5, 1e-4);
    assert!(close(e.phase(&at(1.1)), 0.2, 1e-9));
    assert!(close(e.phase(&at(-0.1)), 0.8, 1e-9));
    // By hand: 1000 d = 2000 cycles; σ_φ = 2000 × 1e-4 / 0.5 = 0.4 cycles (stale,
    // past 0.1), the maximum uncertain by 2000 × 1e-4 = 0.2 d.
    assert!(close(e.phase_sigma(&at(1000.0)), 0.4, 1e-9));
    assert!(close(e.timing_sigma_d(&at(1000.0)), 0.2, 1e-9));
    // By hand: 1/P = 2 per day = 2/1: commensurate, no beat.
    let a = day_alias(0.5, 2);
    assert_eq!((a.m, a.k), (2, 1));
    assert_eq!(a.beat_period_d, None);
}

#[test]
fn period_5_0_d() {
    // By hand: 12 d = 2.4 cycles → phase 0.4; at exactly 10 d (2 cycles) phase 0.
    let e = eph(5.0, 0.0005);
    assert!(close(e.phase(&at(12.0)), 0.4, 1e-12));
    assert!(close(e.phase(&at(10.0)), 0.0, 1e-12));
    // By hand: σ_φ after 12 d = 2.4 × 0.0005 / 5 = 0.00024.
    assert!(close(e.phase_sigma(&at(12.0)), 0.00024, 1e-12));
    // By hand: 1/P = 0.2 per day; nearest m/k with k ≤ 2 is 0/1 (|0.2 − 0| = 0.2
    // against |0.2 − 1/2| = 0.3), so the beat is 1/0.2 = 5 d: each night moves
    // the phase on by 0.2 and five nights run through the cycle.
    let a = day_alias(5.0, 2);
    assert_eq!((a.m, a.k), (0, 1));
    assert!(close(a.beat_period_d.unwrap(), 5.0, 1e-9));
}

#[test]
fn period_7_3_d() {
    // By hand: 100 d / 7.3 d = 13.698630137 cycles (13 × 7.3 = 94.9, remainder
    // 5.1 d = 0.698630137 cycles) → phase 0.698630137.
    let e = eph(7.3, 0.01);
    assert!(close(e.phase(&at(100.0)), 5.1 / 7.3, 1e-9));
    assert!(close(e.phase(&at(100.0)), 0.698_630_137, 1e-8));
    // By hand: −3.65 d is −0.5 cycles → phase 0.5.
    assert!(close(e.phase(&at(-3.65)), 0.5, 1e-9));
    // By hand: after 1000 d, n = 136.986, σ_φ = 136.986 × 0.01 / 7.3 = 0.18765 (stale).
    assert!(close(
        e.phase_sigma(&at(1000.0)),
        1000.0 / 7.3 * 0.01 / 7.3,
        1e-12
    ));
    assert!(close(e.phase_sigma(&at(1000.0)), 0.18765, 1e-5));
    // By hand: 1/P = 0.136986 per day; nearest alias 0/1; beat = 7.3 d.
    let a = day_alias(7.3, 2);
    assert_eq!((a.m, a.k), (0, 1));
    assert!(close(a.beat_period_d.unwrap(), 7.3, 1e-9));
}

#[test]
fn near_daily_and_half_day_aliases() {
    // By hand: P = 1.05 d, 1/P = 0.952381; alias 1/1, beat 1/(1 − 1/1.05) = 21 d.
    let a = day_alias(1.05, 2);
    assert_eq!((a.m, a.k), (1, 1));
    assert!(close(a.beat_period_d.unwrap(), 21.0, 1e-9));
    // By hand: P = 0.4 d, 1/P = 2.5 per day = 5/2: alternate nights see phases
    // 0 and 0.5 only; with k ≤ 2 the alias is 5/2 and there is no beat.
    let a = day_alias(0.4, 2);
    assert_eq!((a.m, a.k), (5, 2));
    assert_eq!(a.beat_period_d, None);
    // With only the daily alias (k = 1) the same period beats at 1/|2.5 − 3| = 2 d.
    let a = day_alias(0.4, 1);
    assert!(close(a.beat_period_d.unwrap(), 2.0, 1e-9));
}

#[test]
fn frac_phase_stays_in_unit_interval() {
    for x in [-3.0, -1e-17, 0.0, 0.999_999_999_999, 5.5, -0.25] {
        let f = frac_phase(x);
        assert!((0.0..1.0).contains(&f), "{x} -> {f}");
    }
    assert!(close(frac_phase(-0.25), 0.75, 1e-15));
}

fn pulsator(p: Option<f64>, e0: Option<f64>, amp: Option<f64>) -> Target {
    let mut t = Target::plain("LPO-T1", 10.0, -20.0);
    t.kind = Kind::Pulsator;
    t.period_d = p;
    t.epoch_max_bjd = e0;
    t.amplitude_mag = amp;
    t.mean_mag = Some(11.0);
    t
}

#[test]
fn bad_input_gives_clear_messages() {
    // Periods outside rung::bounds::PERIOD_D (1e-6 d used to run for minutes).
    for p in [0.0, -2.0, 1e-6, 5000.0, f64::NAN, f64::INFINITY] {
        let e = Star::from_target(&pulsator(Some(p), Some(E0), Some(0.5)))
            .unwrap_err()
            .to_string();
        assert!(
            e.starts_with("invalid period_d of target 'LPO-T1': ")
                && e.contains("is not within 0.01..3000 d"),
            "{e}"
        );
        assert!(!e.contains('\n'));
    }
    let e = Star::from_target(&pulsator(None, Some(E0), None))
        .unwrap_err()
        .to_string();
    assert!(e.contains("period_d") && e.contains("missing"), "{e}");
    let e = Star::from_target(&pulsator(Some(5.0), None, None))
        .unwrap_err()
        .to_string();
    assert!(e.contains("epoch_max_bjd") && e.contains("missing"), "{e}");
    let e = Star::from_target(&pulsator(Some(5.0), Some(61000.5), None))
        .unwrap_err()
        .to_string();
    assert!(e.contains("epoch_max_bjd") && e.contains("full BJD"), "{e}");
    let e = Star::from_target(&pulsator(Some(5.0), Some(E0), Some(f64::NAN)))
        .unwrap_err()
        .to_string();
    assert!(e.contains("amplitude_mag") && e.contains("NaN"), "{e}");
    let e = Ephemeris::new(Some(5.0), Some(E0), Some(-0.1))
        .unwrap_err()
        .to_string();
    assert!(e.contains("period_err_d"), "{e}");
    // Good input beside it still works.
    assert!(Star::from_target(&pulsator(Some(5.0), Some(E0), Some(0.5))).is_ok());
}
