//! The scheduler's invariants (property tests), re-planning, exports and bad input.
//!
//! The methods and the photometry here are small test doubles (documented
//! below): these tests check the scheduler's own rules, not the science of the
//! methods, which their own tests check against published sources.

use chrono::NaiveDate;
use proptest::prelude::*;
use rung::astro::night::Limits;
use rung::astro::time::Instant;
use rung::io::sites::resolve;
use rung::io::targets::{Kind, Target};
use rung::ladder::{Epoch, ExposureModel, Method, MethodSet, Prediction, Setting, Verdict};
use rung::plan::schedule::Status;
use std::collections::BTreeSet;
use std::sync::Arc;

mod plan_support;
use plan_support::Job;

/// Test method: one epoch every `every` nights at local midnight; the
/// "precision" is 10 %/√N so that more epochs always help.
struct EveryNights {
    kind: Kind,
    every: usize,
    visit_s: f64,
}
impl Method for EveryNights {
    fn kind(&self) -> Kind {
        self.kind
    }
    fn propose(&self, s: &Setting, _em: &dyn ExposureModel) -> rung::Result<Vec<Epoch>> {
        let mut out = Vec::new();
        for (i, d) in s.from.iter_days().take_while(|d| *d <= s.to).enumerate() {
            if i % self.every == 0 {
                let noon = rung::astro::night::local_noon(s.site, d)?;
                out.push(Epoch {
                    time: noon.add_seconds(12.0 * 3600.0),
                    exptime_s: 300.0,
                    n_exposures: 1,
                    snr: 100.0,
                    airmass: 1.2,
                    visit_s: self.visit_s,
                    exposures: rung::ladder::BandExposure::single("V", 300.0, 1, 100.0),
                });
            }
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
            kind: self.kind,
            epochs: e.to_vec(),
            distance_precision_pct: 10.0 / (e.len().max(1) as f64).sqrt(),
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
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}

fn targets(n: usize, seed: u64) -> Vec<Target> {
    let mut x = seed
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    let mut next = || {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (x >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|i| {
            let mut t = Target::plain(&format!("T{i}"), next() * 360.0, -80.0 + next() * 100.0);
            t.kind = if i % 2 == 0 {
                Kind::Parallax
            } else {
                Kind::Transient
            };
            t.priority = (next() * 3.0).floor();
            t.goal_pct = Some(5.0);
            t
        })
        .collect()
}

fn run(
    ts: &[Target],
    from: &str,
    to: &str,
    hours: f64,
    done: Vec<rung::plan::schedule::Visit>,
    lost: BTreeSet<NaiveDate>,
) -> rung::plan::schedule::Schedule {
    let a = EveryNights {
        kind: Kind::Parallax,
        every: 2,
        visit_s: 1500.0,
    };
    let b = EveryNights {
        kind: Kind::Transient,
        every: 1,
        visit_s: 900.0,
    };
    let methods = MethodSet::new(vec![Arc::new(a), Arc::new(b)]);
    Job {
        done,
        lost,
        ..Job::new(ts, &methods, from, to, hours)
    }
    .run()
    .unwrap()
}

fn check_invariants(ts: &[Target], s: &rung::plan::schedule::Schedule) {
    let site = resolve("pampa-lucero").unwrap();
    let limits = Limits::new(30.0, -12.0).unwrap();
    // Never two visits at once.
    let mut v: Vec<_> = s.visits.iter().collect();
    v.sort_by(|a, b| a.start.partial_cmp(&b.start).unwrap());
    for w in v.windows(2) {
        assert!(w[0].end <= w[1].start, "{} overlaps {}", w[0].id, w[1].id);
    }
    // Every visit inside its target's window.
    for vis in &s.visits {
        let t = ts.iter().find(|t| t.name == vis.target).unwrap();
        let night = rung::astro::night::Night::new(&site, vis.night).unwrap();
        let tn = night.target(&t.place(), &limits);
        assert!(
            tn.windows
                .iter()
                .any(|(a, b)| vis.start >= *a && vis.end <= *b),
            "{} at {}..{} is outside the windows {:?}",
            vis.id,
            vis.start.iso(),
            vis.end.iso(),
            tn.windows
                .iter()
                .map(|w| (w.0.iso(), w.1.iso()))
                .collect::<Vec<_>>()
        );
    }
    // Capacity per night (a lost night takes no new visits; its done visits stay).
    for n in s.nights.iter().filter(|n| !n.lost) {
        assert!(
            n.used_hours <= n.capacity_hours + 1e-9,
            "{} over capacity",
            n.night
        );
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 6, .. ProptestConfig::default() })]
    #[test]
    fn no_overlap_and_inside_windows(seed in 0u64..1000, n in 3usize..9, hours in 2.0f64..6.0) {
        let ts = targets(n, seed);
        let s = run(&ts, "2026-12-01", "2026-12-05", hours, vec![], BTreeSet::new());
        check_invariants(&ts, &s);
    }

    #[test]
    fn replanning_keeps_done_visits(seed in 0u64..1000, n in 3usize..7) {
        let ts = targets(n, seed);
        let first = run(&ts, "2026-12-01", "2026-12-06", 4.0, vec![], BTreeSet::new());
        prop_assume!(first.visits.len() >= 2);
        // The first half of the visits were observed; the night after is lost.
        let k = first.visits.len() / 2;
        let done: Vec<_> = first.visits[..k].iter().cloned().map(|mut v| { v.status = Status::Done; v }).collect();
        let lost: BTreeSet<NaiveDate> = [first.visits[k].night].into_iter().collect();
        let second = run(&ts, "2026-12-01", "2026-12-06", 4.0, done.clone(), lost.clone());
        for d in &done {
            prop_assert!(second.visits.iter().any(|v| v == d), "done visit {} was dropped or changed", d.id);
        }
        for v in second.visits.iter().filter(|v| v.status == Status::Planned) {
            prop_assert!(!lost.contains(&v.night), "visit {} placed on a lost night", v.id);
        }
        check_invariants(&ts, &second);
    }
}

#[test]
fn same_input_same_schedule() {
    let ts = targets(6, 7);
    let a = run(
        &ts,
        "2026-12-01",
        "2026-12-04",
        5.0,
        vec![],
        BTreeSet::new(),
    );
    let b = run(
        &ts,
        "2026-12-01",
        "2026-12-04",
        5.0,
        vec![],
        BTreeSet::new(),
    );
    assert_eq!(a, b);
    assert!(!a.visits.is_empty());
}

#[test]
fn hours_beyond_the_night_are_refused() {
    let ts = targets(2, 1);
    let m = EveryNights {
        kind: Kind::Parallax,
        every: 1,
        visit_s: 600.0,
    };
    let methods = MethodSet::new(vec![Arc::new(m)]);
    // December nights at -27° have ~7 h with the Sun below -12°.
    let e = Job::new(&ts, &methods, "2026-12-01", "2026-12-03", 11.0)
        .run()
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("--hours-per-night") && e.contains("longest dark time"),
        "{e}"
    );
    assert!(
        Job::new(&ts, &methods, "2026-12-01", "2026-12-03", -1.0)
            .run()
            .is_err()
    );
}

#[test]
fn ics_parses_with_an_independent_reader_and_round_trips_times_and_zone() {
    // Independent reader: the `ical` crate (crates.io), a parser unrelated to rung's writer.
    let ts = targets(6, 3);
    let s = run(
        &ts,
        "2027-03-25",
        "2027-03-30",
        5.0,
        vec![],
        BTreeSet::new(),
    );
    // Use a site whose zone changes offset inside the span (Europe/Madrid, DST on 2027-03-28).
    let site = resolve("sierra-alcaravan").unwrap();
    let stamp = Instant::from_jd_utc(2461400.5).unwrap();
    let mut visits = s.visits.clone();
    // Spread synthetic visits over the DST change to test both offsets.
    let base = rung::astro::time::parse_instant("2027-03-27T21:00:00Z").unwrap();
    for (i, v) in visits.iter_mut().enumerate() {
        v.start = base.add_seconds(i as f64 * 7200.0 * 3.0);
        v.end = v.start.add_seconds(1800.0);
    }
    let text = rung::plan::export::ics(&visits, &site, stamp);
    assert!(
        text.lines().all(|l| l.len() <= 76),
        "a line is longer than 75 octets"
    );
    let reader = ical::IcalParser::new(std::io::BufReader::new(text.as_bytes()));
    let mut n = 0;
    for cal in reader {
        let cal = cal.expect("independent parser refused the file");
        assert_eq!(cal.timezones.len(), 1);
        let tzid = cal.timezones[0]
            .properties
            .iter()
            .find(|p| p.name == "TZID")
            .unwrap();
        assert_eq!(tzid.value.as_deref(), Some("Europe/Madrid"));
        for (ev, v) in cal.events.iter().zip(&visits) {
            n += 1;
            for (key, want) in [("DTSTART", v.start), ("DTEND", v.end)] {
                let p = ev.properties.iter().find(|p| p.name == key).unwrap();
                let params = p.params.as_ref().unwrap();
                let (_, zone) = params.iter().find(|(k, _)| k == "TZID").unwrap();
                assert_eq!(zone, &vec!["Europe/Madrid".to_string()]);
                let tz: chrono_tz::Tz = zone[0].parse().unwrap();
                let local = chrono::NaiveDateTime::parse_from_str(
                    p.value.as_ref().unwrap(),
                    "%Y%m%dT%H%M%S",
                )
                .unwrap();
                use chrono::TimeZone;
                let back = tz.from_local_datetime(&local).earliest().unwrap();
                let back = Instant::from_zoned(&back).unwrap();
                assert!(
                    back.seconds_since(&want).abs() < 0.5,
                    "{key} {} came back as {}",
                    want.iso(),
                    back.iso()
                );
            }
        }
    }
    assert_eq!(n, visits.len());
}
