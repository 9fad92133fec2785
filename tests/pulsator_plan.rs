//! Phase reachability, the phase-bin cover, and the `Method` face of the
//! pulsator method at the invented demo site, with a small test exposure model.

mod plan_support;
use plan_support::day;

use rung::Result;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::Limits;
use rung::io::sites;
use rung::io::targets::{Kind, Target};
use rung::ladder::pulsator::{PulsatorMethod, Star, phase_windows, plan_coverage};
use rung::ladder::{ExposureModel, Method, Verdict};

/// Test exposure model: photon-noise-limited photometry, SNR = √(R t) with the
/// count rate R = 10^(−0.4 (m − 25)) e⁻/s (1 e⁻/s at m = 25, no sky, no read
/// noise), one sub-exposure, 10 s readout, 120 s per visit. Simple enough to
/// check by hand: at m = 12, R = 10^5.2 = 158 489 e⁻/s and SNR 100 takes
/// 10⁴/R = 0.0631 s.
struct PhotonLimited;
impl ExposureModel for PhotonLimited {
    fn snr(&self, mag: f64, _b: &str, t: f64, _c: &Context, _p: &CatalogPlace) -> Result<f64> {
        Ok((10f64.powf(-0.4 * (mag - 25.0)) * t).sqrt())
    }
    fn exptime(
        &self,
        mag: f64,
        _b: &str,
        snr: f64,
        _c: &Context,
        _p: &CatalogPlace,
    ) -> Result<(f64, u32)> {
        Ok((snr * snr / 10f64.powf(-0.4 * (mag - 25.0)), 1))
    }
    fn visit_overhead_s(&self) -> f64 {
        120.0
    }
    fn readout_s(&self) -> f64 {
        10.0
    }
    fn seeing_fwhm_arcsec(&self) -> f64 {
        1.2
    }
}

fn star(period_d: f64) -> Target {
    // Invented pulsator, well placed in the evening sky of December at the demo site.
    let mut t = Target::plain("LPO-TEST", 5.8, -12.4);
    t.kind = Kind::Pulsator;
    t.period_d = Some(period_d);
    t.epoch_max_bjd = Some(2_461_000.327_6);
    t.period_err_d = Some(0.00005);
    t.amplitude_mag = Some(0.45);
    t.mean_mag = Some(12.0);
    t.extinction_mag = 0.3;
    t
}

#[test]
fn windows_phases_and_a_full_cover() {
    let site = sites::resolve("pampa-lucero").unwrap();
    let t = star(2.31);
    let st = Star::from_target(&t).unwrap();
    let limits = Limits::new(30.0, -12.0).unwrap();
    let (ws, _) = phase_windows(&site, &st, day("2026-12-01"), day("2026-12-14"), &limits).unwrap();
    assert!(ws.len() >= 10, "{} windows", ws.len());
    for w in &ws {
        // Phase span of a window = its length / P (BJD runs at the UTC rate to 1e-4).
        let hours = w.end.seconds_since(&w.start) / 3600.0;
        assert!((w.span_cycles - hours / 24.0 / 2.31).abs() < 1e-5);
        let expect_end = (w.phase_start + w.span_cycles).fract();
        assert!((w.phase_end - expect_end).abs() < 1e-6);
    }
    let plan = plan_coverage(&ws, &st.ephemeris, 10, 600.0).unwrap();
    // P = 2.31 d: 1/P = 0.4329 per day, the night's start moves 0.43 in phase
    // every night, so a fortnight reaches every bin.
    assert_eq!(plan.bins_covered, 10);
    assert_eq!(plan.visits.len(), 10);
    let mut bins: Vec<usize> = plan.visits.iter().map(|v| v.bin).collect();
    bins.sort();
    assert_eq!(bins, (0..10).collect::<Vec<_>>());
    for v in &plan.visits {
        assert_eq!(
            (v.phase * 10.0).floor() as usize,
            v.bin,
            "visit phase {} in bin {}",
            v.phase,
            v.bin
        );
        assert!(
            ws.iter()
                .any(|w| w.night == v.night && w.start <= v.time && v.time <= w.end)
        );
    }
    // Lower bound of any cover: no night reaches more than span × 10 + 1 bins.
    let best_night = ws
        .iter()
        .map(|w| (w.span_cycles * 10.0).floor() as usize + 2)
        .max()
        .unwrap();
    assert!(plan.nights_needed() >= 10usize.div_ceil(best_night));
    assert!(plan.nights_needed() <= 6, "{} nights", plan.nights_needed());
}

#[test]
fn a_one_day_period_never_covers_from_one_site() {
    // P = 1.0 d exactly: the same phases every night (only the sidereal drift of
    // the window, ~4 min a night = 0.003 cycles, moves them), so two weeks cannot
    // cover ten bins and the report says why.
    let site = sites::resolve("pampa-lucero").unwrap();
    let t = star(1.0);
    let s = plan_support::setting(&site, &t, "2026-12-01", "2026-12-14");
    let m = PulsatorMethod::default();
    let r = m.analyse(&s, Some(&PhotonLimited)).unwrap();
    assert!(r.plan.bins_covered < 10, "{} bins", r.plan.bins_covered);
    assert_eq!(r.alias.beat_period_d, None);
    assert!(
        r.notes.iter().any(|n| n.contains("commensurate")),
        "{:?}",
        r.notes
    );
    assert!(
        r.notes.iter().any(|n| n.contains("cannot be reached")),
        "{:?}",
        r.notes
    );
}

#[test]
fn method_face_propose_predict_goal() {
    let site = sites::resolve("pampa-lucero").unwrap();
    let t = star(10.0);
    let s = plan_support::setting(&site, &t, "2026-12-01", "2026-12-20");
    let m = PulsatorMethod::default();
    assert_eq!(m.kind(), Kind::Pulsator);
    let em = PhotonLimited;
    let epochs = m.propose(&s, &em).unwrap();
    assert_eq!(epochs.len(), 10);
    for e in &epochs {
        // Faint phase 12.0 + 0.45/2 = 12.225: R = 10^(0.4 × 12.775) = 10^5.11 =
        // 128 825 e⁻/s, t = 100² / R = 0.07762 s (hand calculation with the test model).
        assert!((e.exptime_s - 0.077_62).abs() < 1e-4, "{}", e.exptime_s);
        assert!((e.snr - 100.0).abs() < 1e-6);
        assert!((e.visit_s - (e.exptime_s + 130.0)).abs() < 1e-9);
        assert!(e.airmass >= 1.0 && e.airmass < 2.1);
    }
    let p = m.predict(&s, &em, &epochs).unwrap();
    // With 10 points at SNR 100 (0.0109 mag) σ_m̄ ≈ 0.0109/√10 ≈ 0.0034 mag; the
    // budget is dominated by the V relation's 0.21 mag scatter, with its 0.02
    // mag zero point, the assumed metallicity (0 ± 0.3 dex at γ = −0.2 mag/dex:
    // 0.06 mag), the extinction (0.1 × 0.3 = 0.03 mag) and the V calibration
    // floor (0.01 mag, config/pulsator.toml):
    // 0.460517 × √(0.0441 + 0.0004 + 0.0036 + 0.0009 + 0.0001) = 10.20 %.
    assert!(
        p.distance_precision_pct > 10.1 && p.distance_precision_pct < 10.3,
        "{}",
        p.distance_precision_pct
    );
    assert!(
        (p.hours_needed - epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0).abs() < 1e-12
    );
    // A 3 % goal is below the floor set by the relation's scatter.
    let g = m.goal(&s, &em, 3.0).unwrap();
    match g.verdict {
        Verdict::LimitedByFloor { floor_pct } => {
            assert!((floor_pct - 10.2043).abs() < 0.005, "{floor_pct}")
        }
        v => panic!("expected the floor, got {v:?}"),
    }
    // 11 % is reachable.
    let g = m.goal(&s, &em, 11.0).unwrap();
    assert_eq!(g.verdict, Verdict::Reachable, "{:?}", g.notes);
    assert!(g.distance_precision_pct <= 11.0);
    assert!(g.hours_needed > 0.0);
    // Too few epochs: no precision, and the verdict says more are needed.
    let p = m.predict(&s, &em, &epochs[..4]).unwrap();
    assert!(p.distance_precision_pct.is_infinite());
    assert_eq!(p.verdict, Verdict::NeedsMoreSeasons { seasons: None });
}

#[test]
fn a_stale_ephemeris_is_flagged() {
    // By hand: on 2026-12-02 (JD ≈ 2461376.6) the star is n ≈ (2461376.6 −
    // 2461000.3)/2.31 ≈ 163 cycles past its epoch; with σ_P = 0.002 d,
    // σ_φ ≈ 163 × 0.002 / 2.31 ≈ 0.14 cycles, past the 0.1 threshold.
    let site = sites::resolve("pampa-lucero").unwrap();
    let mut t = star(2.31);
    t.period_err_d = Some(0.002);
    let s = plan_support::setting(&site, &t, "2026-12-01", "2026-12-03");
    let r = PulsatorMethod::default().analyse(&s, None).unwrap();
    assert!(r.stale);
    assert!(
        r.phase_sigma > 0.1 && r.phase_sigma < 0.2,
        "{}",
        r.phase_sigma
    );
    assert!(r.notes.iter().any(|n| n.contains("STALE")));
}

/// The scheduler's fill asks the precision of a plan with one epoch more on
/// each of many nights (`Method::predict_each_extra`); the pulsator method
/// works the base's phases out once, and every answer must be `predict`'s
/// for the base followed by that epoch, to the last bit (also a repeat of
/// a base epoch, one before the base's first, one the method refuses, and
/// a base the method refuses).
#[test]
fn each_extra_epoch_is_predicted_as_predict_predicts_it() {
    let site = sites::resolve("pampa-lucero").unwrap();
    let t = star(10.0);
    let s = plan_support::setting(&site, &t, "2026-12-01", "2026-12-20");
    let m = PulsatorMethod::default();
    let em = PhotonLimited;
    let epochs = m.propose(&s, &em).unwrap();
    assert!(epochs.len() >= 6);
    let (base, rest) = epochs.split_at(epochs.len() - 3);
    let mut extra: Vec<rung::ladder::Epoch> = rest.to_vec();
    extra.push(base[0].clone());
    let mut early = base[0].clone();
    early.time = early.time.add_seconds(-86_400.0 * 3.0);
    extra.push(early);
    let mut bad = base[1].clone();
    bad.snr = -1.0; // refused: the signal-to-noise is not positive
    extra.push(bad.clone());
    let mut bad_base = base.to_vec();
    bad_base[2] = bad;
    for b in [base, &bad_base[..], &base[..2]] {
        plan_support::assert_each_extra_as_predict(&m, &s, &em, b, &extra);
        // The fill's ranking: the base's `predict`, each extra within 1e-6 of it.
        plan_support::assert_ranked_extra_near_predict(&m, &s, &em, b, &extra, 1e-6);
    }
}

/// The pulsator's goal search (the budget's inverse curve asks it goal
/// after goal, keeping the star's phase windows between asks) answers each
/// goal as `Method::goal` does, to the last bit, also when the next ask is
/// over other nights (the windows are then worked out again) and when an
/// ask is refused.
#[test]
fn the_goal_search_answers_each_goal_as_goal_does() {
    let site = sites::resolve("pampa-lucero").unwrap();
    let t = star(10.0);
    let m = PulsatorMethod::default();
    let em = PhotonLimited;
    let mut search = m.goal_search();
    let asks = [
        ("2026-12-01", "2026-12-20", 25.0),
        ("2026-12-01", "2026-12-20", 11.0),
        ("2026-12-01", "2026-12-20", 3.0),
        ("2026-12-01", "2026-12-20", 150.0),
        ("2026-12-05", "2027-01-10", 10.5),
        ("2026-12-05", "2027-01-10", 12.0),
    ];
    for (from, to, goal) in asks {
        let s = plan_support::setting(&site, &t, from, to);
        let kept = search.goal(&s, &em, goal);
        let fresh = m.goal(&s, &em, goal);
        assert_eq!(
            format!("{kept:?}"),
            format!("{fresh:?}"),
            "{from} to {to}, goal {goal} %"
        );
    }
}
