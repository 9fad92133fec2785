//! The urgency rules of the Next queue (`rung::plan::now`), each on its own,
//! then the queue on the demo programme: a row's urgency is the largest of
//! the rules it lists, and the score and order follow the rule written in
//! the module documentation. The rules are the project's own (no published
//! source); these tests hold them to their documented values.

use chrono::NaiveDate;
use rung::astro::night::Limits;
use rung::astro::time::{Instant, parse_instant};
use rung::io::sites::resolve;
use rung::io::targets::{Kind, Target};
use rung::ladder::pulsator::{PulsatorMethod, Star};
use rung::ladder::{BandExposure, Epoch, Setting};
use rung::plan::now::{
    UrgencyRule, last_planned_night, only_tonight, parallax_extreme, queue, window_closing,
};

fn epoch(t: Instant) -> Epoch {
    Epoch {
        time: t,
        exptime_s: 300.0,
        n_exposures: 1,
        snr: 100.0,
        airmass: 1.2,
        visit_s: 900.0,
        exposures: BandExposure::single("V", 300.0, 1, 100.0),
    }
}

fn day(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

fn demo() -> Vec<Target> {
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    rung::io::targets::load(&demo).unwrap().targets
}

#[test]
fn window_closing_rises_over_the_last_three_hours() {
    assert_eq!(window_closing(0.0), 1.0);
    assert_eq!(window_closing(90.0), 0.5);
    assert_eq!(window_closing(180.0), 0.0);
    assert_eq!(window_closing(400.0), 0.0);
    assert!(window_closing(30.0) > window_closing(60.0));
}

#[test]
fn last_planned_night_only_when_nothing_is_planned_later() {
    assert_eq!(last_planned_night(true, false), 1.0);
    assert_eq!(last_planned_night(true, true), 0.0);
    assert_eq!(last_planned_night(false, false), 0.0);
    assert_eq!(last_planned_night(false, true), 0.0);
}

#[test]
fn parallax_extreme_rises_from_80_percent_of_the_extreme() {
    assert_eq!(parallax_extreme(0.5), 0.0);
    assert_eq!(parallax_extreme(0.8), 0.0);
    assert!((parallax_extreme(0.9) - 0.5).abs() < 1e-12);
    assert_eq!(parallax_extreme(1.0), 1.0);
}

/// A demo pulsator with its period replaced: a whole number of days brings
/// the same phase back at the same clock time tomorrow; half a day more
/// brings the opposite phase.
#[test]
fn only_tonight_asks_the_method_whether_tomorrow_gives_the_same_epoch() {
    let site = resolve("pampa-lucero").unwrap();
    let mut t = demo()
        .into_iter()
        .find(|t| t.kind == Kind::Pulsator && t.period_d.is_some())
        .unwrap();
    let m = PulsatorMethod::default();
    let at = parse_instant("2026-12-02T02:00:00Z").unwrap();
    // Tomorrow night: ±2 h around the same clock time, every 10 minutes.
    let tomorrow: Vec<Epoch> = (-12..=12)
        .map(|k| epoch(at.add_seconds(86_400.0 + k as f64 * 600.0)))
        .collect();
    for (period_d, want) in [(1.0, 0.0), (2.0, 1.0), (0.8, 1.0)] {
        t.period_d = Some(period_d);
        assert_eq!(Star::from_target(&t).unwrap().ephemeris.period_d, period_d);
        let setting = Setting {
            site: &site,
            target: &t,
            from: day("2026-12-01"),
            to: day("2026-12-31"),
            limits: Limits::new(30.0, -12.0).unwrap(),
        };
        let (u, why) = only_tonight(&m, &setting, &epoch(at), &tomorrow).unwrap();
        assert_eq!(u, want, "period {period_d} d: {why:?}");
        assert_eq!(why.is_some(), want == 0.0);
        // No window tomorrow: only tonight, whatever the method.
        let (u, _) = only_tonight(&m, &setting, &epoch(at), &[]).unwrap();
        assert_eq!(u, 1.0);
    }
    // A method without a measure of its own (the default: the nearest epoch)
    // always finds tomorrow's instants give it.
    let st = rung::programme::Settings::resolve(&Default::default(), at).unwrap();
    let par = st.method(Kind::Parallax).unwrap();
    let p = demo()
        .into_iter()
        .find(|t| t.kind == Kind::Parallax)
        .unwrap();
    let (u, _) = only_tonight(par, &st.setting(&p), &epoch(at), &tomorrow).unwrap();
    assert_eq!(u, 0.0);
}

#[test]
fn the_queue_takes_the_largest_rule_and_ranks_by_its_score() {
    let cfg = tempfile::tempdir().unwrap();
    // SAFETY: set before any other thread of this test binary reads it.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
    let targets = demo();
    let now = parse_instant("2026-12-02T01:00:00Z").unwrap();
    let demo_path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    let req = rung::programme::Request {
        cli: rung::programme::Choices {
            from: Some("2026-12-01".into()),
            to: Some("2026-12-14".into()),
            ..Default::default()
        },
        programme: Some(demo_path),
        method_files: Default::default(),
    };
    let st = rung::programme::Settings::resolve(&req, now).unwrap();
    let s = rung::plan::schedule::schedule(&rung::plan::schedule::Request::programme(
        &st, &targets, 8.0,
    ))
    .unwrap();
    let plan = rung::plan::file::PlanFile::new(&st, &targets, "demo".into(), 8.0, s.visits);
    let q = queue(&st, &targets, Some(&plan), now).unwrap();
    // A field is one row (its stars are observed in its visits, as the plan
    // places them): every target but the fields' stars has its row.
    let links = rung::ladder::field::link(&targets);
    let members: usize = links.groups.iter().map(|g| g.members.len()).sum();
    assert!(members >= 40, "{members}");
    assert_eq!(q.rows.len(), targets.len() - members);
    for g in &links.groups {
        let f = &targets[g.field].name;
        let row = q.rows.iter().find(|r| &r.target == f).unwrap();
        let says = format!("field: one pointing serves its {} stars", g.members.len());
        assert!(row.reasons.contains(&says), "{f}: {:?}", row.reasons);
        for &m in &g.members {
            assert!(q.rows.iter().all(|r| r.target != targets[m].name));
            assert!(
                plan.visits.iter().all(|v| v.target != targets[m].name),
                "the plan has no visit of a field's star"
            );
        }
    }
    let mut seen = std::collections::BTreeSet::new();
    for r in &q.rows {
        let top = r.urgency_rules.iter().map(|u| u.value).fold(0.0, f64::max);
        assert_eq!(r.urgency, top, "{}", r.target);
        for u in &r.urgency_rules {
            assert!(u.value > 0.0 && u.value <= 1.0, "{}: {u:?}", r.target);
            assert!(r.reasons.contains(&u.why), "{}: {u:?}", r.target);
            seen.insert(u.rule.name());
            match u.rule {
                UrgencyRule::WindowClosing => {
                    assert!(r.visible);
                    assert_eq!(u.value, window_closing(r.minutes_left));
                }
                UrgencyRule::LastPlannedNight => assert_eq!(r.kind, Kind::Transient),
                UrgencyRule::ParallaxExtreme => assert_eq!(r.kind, Kind::Parallax),
                UrgencyRule::OnlyTonight => {}
            }
        }
        let t = targets.iter().find(|t| t.name == r.target).unwrap();
        // Every row in a window says why it ranks there.
        if r.visible {
            assert!(!r.reasons.is_empty(), "{}: no reason", r.target);
        }
        if let Some(why) = rung::plan::budget::observed_words(t) {
            // A supernova already observed: nothing to plan, in the budget's
            // words, no rule, score 0.
            assert!(r.reasons.contains(&why), "{}: {:?}", r.target, r.reasons);
            assert!(r.urgency_rules.is_empty(), "{}", r.target);
            assert_eq!(r.score, 0.0, "{}", r.target);
        } else if r.visible {
            let plan_factor = match r.planned_start {
                Some(t) if t.seconds_since(&now) <= 1800.0 => 1.5,
                Some(_) => 1.2,
                None => 1.0,
            };
            let want =
                r.priority.max(1e-3) * (1.0 + 2.0 * r.urgency) * plan_factor / r.airmass.unwrap();
            assert!((r.score - want).abs() < 1e-9 * want, "{}", r.target);
        } else {
            assert_eq!(r.score, 0.0);
        }
    }
    assert!(!seen.is_empty(), "no rule applied anywhere in the demo");
    // The demo's supernova of 2024 is up, and follows every visible target
    // worth a visit (it ranked among them with no reason before).
    let sn = q.rows.iter().find(|r| r.target == "LPO-S2024a").unwrap();
    assert!(sn.visible);
    assert!(
        q.rows
            .iter()
            .filter(|r| r.visible && r.score > 0.0)
            .all(|r| r.rank < sn.rank)
    );
    assert!(
        sn.reasons[0].starts_with("observed (peak 5.60 ± 0.05 mag given), nothing to plan"),
        "{:?}",
        sn.reasons
    );
    // Visible first, by score.
    for w in q.rows.windows(2) {
        assert!(w[0].visible >= w[1].visible);
        if w[0].visible && w[1].visible {
            assert!(w[0].score >= w[1].score);
        }
    }
    // The JSON names each rule.
    let j = serde_json::to_value(&q).unwrap();
    let names: Vec<&str> = j["rows"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|r| r["urgency_rules"].as_array().unwrap())
        .map(|u| u["rule"].as_str().unwrap())
        .collect();
    assert!(names.iter().all(|n| seen.contains(n)));
}

/// `rung next` in daylight says each row's Sun caution once, first in its
/// why (it printed "SUN CAUTION: SUN CAUTION: target is ..."), and the
/// caution's advice whole.
#[test]
fn rung_next_says_the_sun_caution_once() {
    let cfg = tempfile::tempdir().unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(["next", "--at", "2026-12-02T16:00:00Z"])
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", cfg.path())
        .output()
        .unwrap();
    assert!(o.status.success());
    let out = String::from_utf8_lossy(&o.stdout);
    let cautioned: Vec<&str> = out.lines().filter(|l| l.contains("SUN CAUTION")).collect();
    assert!(!cautioned.is_empty(), "{out}");
    for l in cautioned {
        assert_eq!(l.matches("SUN CAUTION").count(), 1, "{l}");
        assert!(
            l.contains("SUN CAUTION: target is ")
                && l.contains("without the observatory's own safety clearance"),
            "{l}"
        );
    }
}
