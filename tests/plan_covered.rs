//! A visit already done gives some of the epochs a method asks for; when the
//! rest is re-planned those are not planned again, by the method's own
//! measure (`Method::covered`) and not by the scheduler's guess.
//!
//! 1. The pulsator's measure (its science, `src/ladder/pulsator/method.rs`):
//!    a done visit gives the wanted epoch in its phase bin, whenever in the
//!    season it was taken; in a bin nobody asked for it gives none.
//! 2. The scheduler (a test double whose measure is a label): it drops
//!    exactly the epochs the method says are given, says so in the target's
//!    notes, and without a measure of its own a method keeps the default
//!    (each done visit gives the wanted epoch nearest it in time).

use chrono::NaiveDate;
use rung::astro::time::{Instant, parse_instant};
use rung::io::sites::resolve;
use rung::io::targets::{Kind, Target};
use rung::ladder::pulsator::{PulsatorMethod, Star};
use rung::ladder::{
    BandExposure, Epoch, ExposureModel, Method, MethodSet, Prediction, Setting, Verdict,
};
use rung::plan::schedule::{Status, Visit};
use std::sync::Arc;

mod plan_support;
use plan_support::{Job, day};

fn epoch(t: Instant, snr: f64) -> Epoch {
    Epoch {
        time: t,
        exptime_s: 300.0,
        n_exposures: 1,
        snr,
        airmass: 1.2,
        visit_s: 900.0,
        exposures: BandExposure::single("V", 300.0, 1, snr),
    }
}

fn demo_pulsator() -> Target {
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    rung::io::targets::load(&demo)
        .unwrap()
        .targets
        .into_iter()
        .find(|t| t.kind == Kind::Pulsator && t.period_d.is_some() && t.epoch_max_bjd.is_some())
        .expect("a pulsator in the demo programme")
}

#[test]
fn a_done_visit_gives_the_pulsator_epoch_of_its_phase_bin() {
    let site = resolve("pampa-lucero").unwrap();
    let t = demo_pulsator();
    let s = plan_support::setting(&site, &t, "2026-12-01", "2027-01-31");
    let m = PulsatorMethod::default();
    let star = Star::from_target(&t).unwrap();
    let p = star.ephemeris.period_d;
    let phase = |x: Instant| {
        let b = rung::astro::bary::bjd_tdb(&site, x, &star.place).unwrap();
        star.ephemeris.phase(&b)
    };
    let n = m.bins;
    // One wanted epoch at the middle of every phase bin, within one cycle.
    let t0 = parse_instant("2026-12-02T02:00:00Z").unwrap();
    let phi0 = phase(t0);
    let wanted: Vec<Epoch> = (0..n)
        .map(|k| {
            let dphi = ((k as f64 + 0.5) / n as f64 - phi0).rem_euclid(1.0);
            epoch(t0.add_seconds(dphi * p * 86_400.0), 100.0)
        })
        .collect();
    for (k, w) in wanted.iter().enumerate() {
        assert_eq!((phase(w.time) * n as f64).floor() as usize, k);
    }
    // Done 7 cycles later in bin 3 (bins from 0): it gives bin 3's epoch,
    // not the wanted epoch nearest in time (the last one).
    let done = epoch(wanted[3].time.add_seconds(7.0 * p * 86_400.0), 100.0);
    let c = m.covered(&s, std::slice::from_ref(&done), &wanted).unwrap();
    let given: Vec<usize> = (0..n).filter(|k| c[*k].is_some()).collect();
    assert_eq!(given, vec![3], "{c:?}");
    let why = c[3].as_deref().unwrap();
    assert!(why.contains(&format!("phase bin 4 of {n}")), "{why}");
    let nearest = rung::ladder::covered_nearest(std::slice::from_ref(&done), &wanted);
    let last = (0..n)
        .max_by(|a, b| wanted[*a].time.partial_cmp(&wanted[*b].time).unwrap())
        .unwrap();
    assert_ne!(
        last, 3,
        "the test needs the nearest in time to be another bin"
    );
    assert!(nearest[3].is_none() && nearest[last].is_some());
    // Two done visits in one bin give its one epoch once.
    let c = m
        .covered(&s, &[done.clone(), done.clone()], &wanted)
        .unwrap();
    assert_eq!(c.iter().filter(|x| x.is_some()).count(), 1);
    // A bin nobody asked for: nothing is given.
    let others: Vec<Epoch> = wanted
        .iter()
        .enumerate()
        .filter(|(k, _)| *k != 3)
        .map(|(_, e)| e.clone())
        .collect();
    let c = m.covered(&s, std::slice::from_ref(&done), &others).unwrap();
    assert!(c.iter().all(|x| x.is_none()), "{c:?}");
}

/// Test method: one epoch at local midnight on each of the first six nights,
/// labelled by its signal-to-noise (100 + night mod 3: the "bin"). With
/// `labels` its measure is the label: a done epoch gives the first wanted
/// epoch of its label; without, it keeps the default. Its precision does not
/// change with more epochs, so the fill adds nothing.
struct Labelled {
    labels: bool,
}

impl Method for Labelled {
    fn kind(&self) -> Kind {
        Kind::Pulsator
    }
    fn propose(&self, s: &Setting, _em: &dyn ExposureModel) -> rung::Result<Vec<Epoch>> {
        let mut out = Vec::new();
        for (i, d) in s.from.iter_days().take(6).enumerate() {
            let midnight = rung::astro::night::local_noon(s.site, d)?.add_seconds(12.0 * 3600.0);
            out.push(epoch(midnight, 100.0 + (i % 3) as f64));
        }
        Ok(out)
    }
    fn predict(
        &self,
        _s: &Setting,
        _em: &dyn ExposureModel,
        e: &[Epoch],
    ) -> rung::Result<Prediction> {
        Ok(Prediction {
            kind: Kind::Pulsator,
            epochs: e.to_vec(),
            distance_precision_pct: 5.0,
            hours_needed: e.iter().map(|x| x.visit_s).sum::<f64>() / 3600.0,
            verdict: Verdict::Reachable,
            notes: vec![],
            error_terms: vec![],
        })
    }
    fn goal(&self, s: &Setting, em: &dyn ExposureModel, _g: f64) -> rung::Result<Prediction> {
        let e = self.propose(s, em)?;
        self.predict(s, em, &e)
    }
    fn covered(
        &self,
        _s: &Setting,
        done: &[Epoch],
        wanted: &[Epoch],
    ) -> rung::Result<Vec<Option<String>>> {
        if !self.labels {
            return Ok(rung::ladder::covered_nearest(done, wanted));
        }
        let mut out: Vec<Option<String>> = vec![None; wanted.len()];
        for d in done {
            if let Some(k) =
                (0..wanted.len()).find(|k| out[*k].is_none() && wanted[*k].snr == d.snr)
            {
                out[k] = Some(format!("label {} already observed", d.snr));
            }
        }
        Ok(out)
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}

fn replan(labels: bool, done: Vec<Visit>) -> rung::plan::schedule::Schedule {
    let mut t = Target::plain("P1", 80.0, -30.0);
    t.kind = Kind::Pulsator;
    t.goal_pct = Some(5.0);
    let ts = vec![t];
    let m = MethodSet::new(vec![Arc::new(Labelled { labels })]);
    Job {
        done,
        ..Job::new(&ts, &m, "2026-12-01", "2026-12-08", 6.0)
    }
    .run()
    .unwrap()
}

fn planned_nights(s: &rung::plan::schedule::Schedule) -> Vec<NaiveDate> {
    s.visits
        .iter()
        .filter(|v| v.status == Status::Planned)
        .map(|v| v.night)
        .collect()
}

#[test]
fn the_scheduler_drops_what_the_method_says_a_done_visit_gives() {
    let first = replan(true, vec![]);
    assert_eq!(first.visits.len(), 6, "{:?}", planned_nights(&first));
    // The visit of the sixth night (label 102) observed, moved onto the
    // seventh night's midnight and relabelled 101: by its label it gives the
    // second night's epoch, while the nearest in time is the sixth night's.
    let v = first
        .visits
        .iter()
        .find(|v| v.night == day("2026-12-06"))
        .unwrap();
    let shift = rung::plan::schedule::SIDEREAL_DAY_S;
    let done = Visit {
        status: Status::Done,
        start: v.start.add_seconds(shift),
        end: v.end.add_seconds(shift),
        night: day("2026-12-07"),
        snr: 101.0,
        exposures: BandExposure::single("V", 300.0, 1, 101.0),
        id: "P1#7".into(),
        ..v.clone()
    };
    let by_label = replan(true, vec![done.clone()]);
    assert_eq!(
        planned_nights(&by_label),
        [
            "2026-12-01",
            "2026-12-03",
            "2026-12-04",
            "2026-12-05",
            "2026-12-06"
        ]
        .map(day)
    );
    let notes = by_label.outcomes[0].notes.join("; ");
    assert!(notes.contains("label 101 already observed"), "{notes}");
    let by_time = replan(false, vec![done]);
    assert_eq!(
        planned_nights(&by_time),
        [
            "2026-12-01",
            "2026-12-02",
            "2026-12-03",
            "2026-12-04",
            "2026-12-05"
        ]
        .map(day)
    );
}
