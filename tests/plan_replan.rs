//! Re-planning, as properties: after nights and visits are lost and the rest
//! re-planned, no two visits of one target are closer than its method allows,
//! no transient is visited after its useful window, and every precision a
//! plan prints is finite.
//!
//! The methods here are small test doubles (documented on each): these tests
//! check the scheduler's rules, not the methods' science.

use chrono::NaiveDate;
use proptest::prelude::*;
use rung::io::targets::{Kind, Target};
use rung::ladder::{
    BandExposure, DEFAULT_SPACING_S, Epoch, ExposureModel, Method, MethodSet, Prediction, Setting,
    Verdict,
};
use rung::plan::schedule::{Schedule, Status, Visit};
use std::collections::BTreeSet;
use std::sync::Arc;

mod plan_support;
use plan_support::{Job, day};

/// Test method: on every night from `first` (nights after the range's start)
/// to `last`, `per_night` epochs `gap_h` hours apart around local midnight.
/// Its precision is `precision(n)` for n epochs, so absurd and non-finite
/// values can be asked for.
struct Nightly {
    kind: Kind,
    first: usize,
    last: usize,
    per_night: usize,
    gap_h: f64,
    precision: fn(usize) -> f64,
}

impl Method for Nightly {
    fn kind(&self) -> Kind {
        self.kind
    }
    fn propose(&self, s: &Setting, _em: &dyn ExposureModel) -> rung::Result<Vec<Epoch>> {
        let mut out = Vec::new();
        for (i, d) in s.from.iter_days().take_while(|d| *d <= s.to).enumerate() {
            if i < self.first || i > self.last {
                continue;
            }
            let midnight = rung::astro::night::local_noon(s.site, d)?.add_seconds(12.0 * 3600.0);
            for k in 0..self.per_night {
                let off = (k as f64 - (self.per_night as f64 - 1.0) / 2.0) * self.gap_h * 3600.0;
                out.push(Epoch {
                    time: midnight.add_seconds(off),
                    exptime_s: 300.0,
                    n_exposures: 1,
                    snr: 100.0,
                    airmass: 1.2,
                    visit_s: 900.0,
                    exposures: BandExposure::single("V", 300.0, 1, 100.0),
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
            distance_precision_pct: (self.precision)(e.len()),
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

const FROM: &str = "2026-12-01";
const TO: &str = "2026-12-08";

/// Targets near the meridian at local midnight in December at the demo
/// site, so every night has a window for each.
fn targets(n: usize, seed: u64) -> Vec<Target> {
    (0..n)
        .map(|i| {
            let ra = 60.0 + ((seed as usize * 7 + i * 13) % 40) as f64;
            let mut t = Target::plain(&format!("T{i}"), ra, -30.0 + (i % 5) as f64 * 4.0);
            t.kind = match i % 3 {
                0 => Kind::Pulsator,
                1 => Kind::Transient,
                _ => Kind::Parallax,
            };
            t.priority = 1.0 + (i % 3) as f64;
            t.goal_pct = Some(5.0);
            t
        })
        .collect()
}

/// The doubles: pulsators asking for three visits a night 2 h apart (closer
/// than the default spacing: the method asks for it), transients useful on
/// nights 1 to 4 only, parallaxes one a night with absurd or non-finite
/// precisions for few epochs.
fn methods() -> MethodSet {
    MethodSet::new(vec![
        Arc::new(Nightly {
            kind: Kind::Pulsator,
            first: 0,
            last: 99,
            per_night: 3,
            gap_h: 2.0,
            precision: |n| 10.0 / (n.max(1) as f64).sqrt(),
        }),
        Arc::new(Nightly {
            kind: Kind::Transient,
            first: 1,
            last: 4,
            per_night: 1,
            gap_h: 0.0,
            precision: |n| if n < 3 { 8350.0 } else { 7.0 },
        }),
        Arc::new(Nightly {
            kind: Kind::Parallax,
            first: 0,
            last: 99,
            per_night: 1,
            gap_h: 0.0,
            precision: |n| {
                if n < 4 {
                    f64::NAN
                } else if n < 6 {
                    f64::INFINITY
                } else {
                    3.0
                }
            },
        }),
    ])
}

fn run(ts: &[Target], done: Vec<Visit>, lost: BTreeSet<NaiveDate>, hours: f64) -> Schedule {
    let m = methods();
    Job {
        done,
        lost,
        ..Job::new(ts, &m, FROM, TO, hours)
    }
    .run()
    .unwrap()
}

/// The spacing the doubles allow: the default, or the method's own closer epochs.
fn allowed_s(kind: Kind) -> f64 {
    match kind {
        Kind::Pulsator => 2.0 * 3600.0,
        _ => DEFAULT_SPACING_S,
    }
}

fn check_spacing(s: &Schedule) -> Result<(), TestCaseError> {
    let mut by: std::collections::BTreeMap<&str, Vec<&Visit>> = Default::default();
    for v in s.visits.iter().filter(|v| v.status != Status::Lost) {
        by.entry(v.target.as_str()).or_default().push(v);
    }
    // Spacing counts from a done visit's observed time (Visit::span), from
    // the planned time for any other.
    let mid = |v: &Visit| {
        let (a, b) = v.span();
        a.add_seconds(b.seconds_since(&a) / 2.0)
    };
    for (name, mut vs) in by {
        vs.sort_by(|a, b| mid(a).partial_cmp(&mid(b)).unwrap());
        for w in vs.windows(2) {
            let gap = mid(w[1]).seconds_since(&mid(w[0]));
            prop_assert!(
                gap >= allowed_s(w[0].kind) - 1.0,
                "{name}: {} and {} only {:.0} s apart",
                w[0].id,
                w[1].id,
                gap
            );
        }
    }
    Ok(())
}

fn check_transient_window(s: &Schedule) -> Result<(), TestCaseError> {
    let last_useful = day(FROM) + chrono::Days::new(4);
    for v in s.visits.iter().filter(|v| v.kind == Kind::Transient) {
        prop_assert!(
            v.night <= last_useful && v.night >= day(FROM) + chrono::Days::new(1),
            "{} on {} is outside its useful window",
            v.id,
            v.night
        );
    }
    Ok(())
}

fn check_precisions(s: &Schedule) -> Result<(), TestCaseError> {
    for o in &s.outcomes {
        if let Some(p) = o.distance_precision_pct {
            prop_assert!(
                p.is_finite() && p > 0.0 && p <= 100.0,
                "{}: {p} printed",
                o.target
            );
        }
        // The words a plan prints never carry a non-finite number.
        let text = serde_json::to_string(&o.notes).unwrap();
        prop_assert!(!text.contains("NaN") && !text.contains("inf"), "{text}");
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 8, .. ProptestConfig::default() })]
    #[test]
    fn replanning_keeps_spacing_windows_and_finite_precisions(
        seed in 0u64..1000,
        n in 3usize..8,
        lost_mask in 0u8..=255,
        done_every in 2usize..5,
        hours in 3.0f64..7.0,
        early_h in -1i32..=1,
    ) {
        let ts = targets(n, seed);
        let first = run(&ts, vec![], BTreeSet::new(), hours);
        check_spacing(&first)?;
        check_transient_window(&first)?;
        check_precisions(&first)?;
        // Some visits observed (an hour earlier than planned, on time, or an
        // hour later: the observed time is what the spacing counts from),
        // some nights lost, the rest re-planned.
        let done: Vec<Visit> = first
            .visits
            .iter()
            .enumerate()
            .filter(|(i, _)| i % done_every == 0)
            .map(|(_, v)| Visit {
                status: Status::Done,
                observed: Some(v.start.add_seconds(3600.0 * early_h as f64)),
                ..v.clone()
            })
            .collect();
        let lost: BTreeSet<NaiveDate> = (0..8)
            .filter(|k| lost_mask & (1 << k) != 0)
            .map(|k| day(FROM) + chrono::Days::new(k))
            .filter(|d| !done.iter().any(|v| v.night == *d))
            .collect();
        let second = run(&ts, done, lost.clone(), hours);
        check_spacing(&second)?;
        check_transient_window(&second)?;
        check_precisions(&second)?;
        for v in second.visits.iter().filter(|v| v.status == Status::Planned) {
            prop_assert!(!lost.contains(&v.night), "{} on a lost night", v.id);
        }
    }
}

/// A re-plan at a clock inside the range places nothing before the clock.
#[test]
fn a_replan_places_nothing_before_the_clock() {
    let ts = targets(6, 3);
    let m = methods();
    let now = rung::astro::time::parse_instant("2026-12-04T04:00:00Z").unwrap();
    let s = Job {
        not_before: Some(now),
        ..Job::new(&ts, &m, FROM, TO, 6.0)
    }
    .run()
    .unwrap();
    assert!(!s.visits.is_empty());
    for v in &s.visits {
        assert!(
            v.start >= now,
            "{} starts at {} before the clock",
            v.id,
            v.start.iso()
        );
    }
}

/// A fixed case of the property above: the pulsator double asks for
/// visits 2 h apart (its first night: 00:52:30, 02:52:30, 04:52:30 and
/// 06:52:30 UTC, each 15 min). Its first visit, planned for 00:52:30, is
/// marked done an hour early, observed from 23:52:30. The re-plan holds it
/// from 23:52:30 to 00:07:30 (its planned length) and the star's next
/// visit that night is at least the method's 2 h after it, counted from the
/// observed time (mid 00:00:00), not from the planned one (mid 01:00:00).
#[test]
fn a_pulsator_visit_done_an_hour_early_spaces_the_next_from_its_observed_time() {
    use rung::astro::time::parse_instant;
    let at = |s: &str| parse_instant(s).unwrap();
    let ts: Vec<Target> = targets(1, 0);
    assert_eq!(ts[0].kind, Kind::Pulsator);
    let first = run(&ts, vec![], BTreeSet::new(), 6.0);
    let v1 = first.visits.iter().find(|v| v.id == "T0#1").unwrap();
    assert_eq!(v1.start.iso(), "2026-12-02T00:52:30Z");
    assert_eq!(v1.end.iso(), "2026-12-02T01:07:30Z");
    let done = Visit {
        status: Status::Done,
        observed: Some(at("2026-12-01T23:52:30Z")),
        ..v1.clone()
    };
    let second = run(&ts, vec![done], BTreeSet::new(), 6.0);
    let held = second.visits.iter().find(|v| v.id == "T0#1").unwrap();
    assert_eq!(held.status, Status::Done);
    let (a, b) = held.span();
    assert_eq!(a.iso(), "2026-12-01T23:52:30Z");
    assert_eq!(b.iso(), "2026-12-02T00:07:30Z");
    // Its epoch, for the star's phase and its prediction, is the observed
    // mid (00:00:00), not the planned one (01:00:00).
    assert_eq!(v1.epoch().time.iso(), "2026-12-02T01:00:00Z");
    assert_eq!(held.epoch().time.iso(), "2026-12-02T00:00:00Z");
    let outcome = second.outcomes.iter().find(|o| o.target == "T0").unwrap();
    let times: Vec<String> = outcome
        .prediction
        .as_ref()
        .expect("the star's visits give a prediction")
        .epochs
        .iter()
        .map(|e| e.time.iso())
        .collect();
    assert!(
        times.contains(&"2026-12-02T00:00:00Z".to_string())
            && !times.contains(&"2026-12-02T01:00:00Z".to_string()),
        "{times:?}"
    );
    let mut later: Vec<&Visit> = second
        .visits
        .iter()
        .filter(|v| v.target == "T0" && v.night == day(FROM) && v.status == Status::Planned)
        .collect();
    later.sort_by(|x, y| x.start.partial_cmp(&y.start).unwrap());
    let next = later.first().expect("the star is visited again that night");
    let mid = |v: &Visit| {
        let (a, b) = v.span();
        a.add_seconds(b.seconds_since(&a) / 2.0)
    };
    // From the observed mid, 00:00:00: at least 2 h (to the second).
    let gap_s = mid(next).seconds_since(&at("2026-12-02T00:00:00Z"));
    assert!(
        gap_s >= 2.0 * 3600.0 - 1.0,
        "{} at {} is {gap_s:.0} s after the observed visit",
        next.id,
        next.start.iso()
    );
    // Here it keeps its planned 02:52:30, three hours after the observed mid.
    assert_eq!(next.start.iso(), "2026-12-02T02:52:30Z");
    // Its calendar event too is where it was observed, with its planned
    // time in the description; a visit not done keeps its planned time.
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let ics = rung::plan::export::ics(&second.visits, &site, at("2026-12-01T12:00:00Z"))
        .replace("\r\n ", "");
    let event = |id: &str| {
        ics.split("BEGIN:VEVENT")
            .find(|e| e.contains(&format!("UID:{id}@rung")))
            .unwrap()
            .to_string()
    };
    let e1 = event("T0#1");
    assert!(
        e1.contains("UTC 2026-12-01T23:52:30Z to 2026-12-02T00:07:30Z")
            && e1.contains("planned for UTC 2026-12-02T00:52:30Z to 2026-12-02T01:07:30Z")
            // pampa-lucero's zone, America/Argentina/Catamarca (config/sites.toml),
            // keeps UTC−3 all year in the IANA tz database (from memory; an
            // exported file's local times are read back with an independent
            // iCalendar parser in tests/plan_schedule.rs):
            // 23:52:30 UTC is 20:52:30 local.
            && e1.contains(":20261201T205230"),
        "{e1}"
    );
    // The night sheet shows it at its observed time, in time order: the
    // star's first row that night.
    let sheet = rung::plan::export::night_sheet(&second.visits, &site, day(FROM), "");
    let rows: Vec<&str> = sheet
        .lines()
        .filter(|l| l.starts_with("| ") && l.contains("| T0#"))
        .collect();
    assert!(
        rows.first()
            .is_some_and(|r| r.starts_with("| 23:52:30 |") && r.contains("| T0#1 |")),
        "{rows:?}"
    );
    // Observed after the star's next planned visit (03:30:00, after
    // 02:52:30): the sheet lists the two in the order of their times.
    let v2 = first.visits.iter().find(|v| v.id == "T0#2").unwrap();
    assert_eq!(v2.start.iso(), "2026-12-02T02:52:30Z");
    let after = Visit {
        status: Status::Done,
        observed: Some(at("2026-12-02T03:30:00Z")),
        ..v1.clone()
    };
    let sheet = rung::plan::export::night_sheet(&[after, v2.clone()], &site, day(FROM), "");
    let rows: Vec<&str> = sheet.lines().filter(|l| l.contains("| T0#")).collect();
    assert!(
        rows.len() == 2
            && rows[0].starts_with("| 02:52:30 |")
            && rows[1].starts_with("| 03:30:00 |"),
        "{rows:?}"
    );
    let e2 = event(&next.id);
    assert!(
        e2.contains(":20261201T235230") && !e2.contains("planned for"),
        "{e2}"
    );
    for v in &later {
        assert!(
            v.start >= b || v.end <= a,
            "{} overlaps the observed visit",
            v.id
        );
    }
    // The same visit marked an hour late instead (observed 01:52:30, mid
    // 02:00:00): the visit planned at 02:52:30 (mid 03:00:00) would be 1 h
    // after it, so no visit of the star that night has its mid before
    // 04:00:00; spacing from the planned mid (01:00:00) would have kept it.
    let late = Visit {
        status: Status::Done,
        observed: Some(at("2026-12-02T01:52:30Z")),
        ..v1.clone()
    };
    let third = run(&ts, vec![late], BTreeSet::new(), 6.0);
    for v in third
        .visits
        .iter()
        .filter(|v| v.target == "T0" && v.night == day(FROM) && v.status == Status::Planned)
    {
        assert!(
            mid(v).seconds_since(&at("2026-12-02T04:00:00Z")) >= -1.0,
            "{} at {} is under 2 h after the observed 01:52:30",
            v.id,
            v.start.iso()
        );
    }
}

/// A visit planned for the second night but observed on the first (as the
/// Next view's `D` does when it offers a target's nearest visit from
/// another night) holds its observed time on the first night: the re-plan
/// places nothing on the first night over it, and the first night's hours
/// used count it. They used to go to its planned night, so the first
/// night's packing did not see it and placed other visits over it (here
/// for some of the first night's visits' times, observed there in turn).
#[test]
fn a_visit_done_on_another_night_holds_its_time_on_that_night() {
    let ts: Vec<Target> = targets(6, 7);
    let first = run(&ts, vec![], BTreeSet::new(), 6.0);
    let on = |v: &Visit, d: &str| v.night == day(d) && v.status == Status::Planned;
    let v = first
        .visits
        .iter()
        .find(|v| on(v, "2026-12-02"))
        .expect("a visit on the second night")
        .clone();
    let mut overlaps = Vec::new();
    // Observed, in turn, where each of the first night's visits of the
    // other targets stands.
    for w in first
        .visits
        .iter()
        .filter(|w| on(w, "2026-12-01") && w.target != v.target)
    {
        let done = Visit {
            status: Status::Done,
            observed: Some(w.start),
            ..v.clone()
        };
        let (a, b) = done.span();
        let second = run(&ts, vec![done], BTreeSet::new(), 6.0);
        let tonight: Vec<&Visit> = second
            .visits
            .iter()
            .filter(|x| on(x, "2026-12-01"))
            .collect();
        for x in &tonight {
            let (xa, xb) = x.span();
            if !(xb <= a || xa >= b) {
                overlaps.push(format!(
                    "{} ({} to {}) over {} observed from {} to {}",
                    x.id,
                    xa.iso(),
                    xb.iso(),
                    v.id,
                    a.iso(),
                    b.iso()
                ));
            }
        }
        let placed_h: f64 = tonight
            .iter()
            .map(|x| x.end.seconds_since(&x.start) / 3600.0)
            .sum();
        let n1 = second
            .nights
            .iter()
            .find(|n| n.night == day("2026-12-01"))
            .unwrap();
        let dur_h = b.seconds_since(&a) / 3600.0;
        assert!(
            (n1.used_hours - (placed_h + dur_h)).abs() < 1e-6,
            "observed at {}: the first night's {} h used against {placed_h} h placed and {dur_h} h observed",
            a.iso(),
            n1.used_hours
        );
    }
    assert!(overlaps.is_empty(), "{}", overlaps.join("\n"));
}
