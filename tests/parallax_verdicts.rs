//! Goal-mode verdicts of the parallax method agree with one another whatever
//! the date range: "needs N seasons" and "limited by the floor" are two answers
//! to one question (can these nights, continued, reach the goal?), so a target
//! and goal get the same kind of answer from every range, a "needs N seasons"
//! comes with a floor below the goal, a floor verdict with a floor above it,
//! and the N seasons, once a range really holds them, reach the goal.
//!
//! The model is SCIENCE.md's (Parallax): independent per-epoch errors (centroid,
//! floor and DCR in quadrature) fitted by least squares for (x0, y0, μx, μy, ϖ).
//! With independent errors the parallax variance only falls as epochs are added
//! (the normal matrix only grows; a property of least squares, common
//! practice), which is what makes the two answers one. The demo programme
//! (invented targets at the invented Pampa Lucero Observatory) with the demo
//! instrument, as `rung budget` runs it: altitude above 30°, Sun below −12°.

use chrono::NaiveDate;
use rung::astro::night::Limits;
use rung::astro::site::Site;
use rung::io::targets::Target;
use rung::ladder::parallax::{ParallaxMethod, ParallaxPlan};
use rung::ladder::{Setting, Verdict};
use rung::photometry::Photometer;

fn d(s: &str) -> NaiveDate {
    s.parse().unwrap()
}

fn demo() -> (Site, Vec<Target>, Photometer) {
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let loaded = rung::io::targets::load(std::path::Path::new("targets-demo/targets.csv")).unwrap();
    assert!(loaded.problems.is_empty(), "{:?}", loaded.problems);
    let em = Photometer::from_name("lucero-1m", &site).unwrap();
    (site, loaded.targets, em)
}

fn target<'a>(ts: &'a [Target], name: &str) -> &'a Target {
    ts.iter().find(|t| t.name == name).unwrap()
}

fn limits() -> Limits {
    Limits::new(30.0, -12.0).unwrap()
}

const FROM: &str = "2026-12-01";
/// Ten months, eighteen months (the README's budget), three years.
const TO: [&str; 3] = ["2027-09-30", "2028-05-31", "2029-11-30"];

fn goal(site: &Site, t: &Target, em: &Photometer, to: &str, goal_pct: f64) -> ParallaxPlan {
    let m = ParallaxMethod::builtin().unwrap();
    let s = Setting {
        site,
        target: t,
        from: d(FROM),
        to: d(to),
        limits: limits(),
    };
    m.goal_plan(&s, em, goal_pct).unwrap()
}

/// One plan on its own: the verdict and the numbers behind it agree.
fn check_one(p: &ParallaxPlan, goal_pct: f64, what: &str) {
    match &p.prediction.verdict {
        Verdict::Reachable => {
            assert!(p.prediction.distance_precision_pct <= goal_pct, "{what}");
        }
        Verdict::NeedsMoreSeasons { seasons: Some(n) } => {
            let r = p
                .reach
                .as_ref()
                .expect("a shortfall says how far the nights go");
            let floor = r.floor_pct.expect("a season count comes with a floor");
            assert!(
                floor <= goal_pct,
                "{what}: needs {n} seasons but floor {floor} % ≥ goal"
            );
            assert_eq!(r.seasons_needed, Some(*n as usize), "{what}");
            // The range's own seasons fell short, so more are needed.
            assert!(
                *n as usize >= r.range_seasons,
                "{what}: {n} < {}",
                r.range_seasons
            );
            assert!(r.range_best_pct.is_none_or(|b| b > goal_pct), "{what}");
        }
        Verdict::LimitedByFloor { floor_pct } => {
            let r = p
                .reach
                .as_ref()
                .expect("a floor verdict says how far the nights go");
            assert!(
                *floor_pct > goal_pct,
                "{what}: floor {floor_pct} % is below the goal"
            );
            assert_eq!(r.floor_pct, Some(*floor_pct), "{what}");
            assert_eq!(r.seasons_needed, None, "{what}");
        }
        v => panic!("{what}: unexpected verdict {v:?}"),
    }
}

/// The plans of one target and goal over several ranges from the same start agree.
fn check_across(plans: &[ParallaxPlan], goal_pct: f64, what: &str) {
    let needs: Vec<(usize, u32)> = plans
        .iter()
        .enumerate()
        .filter_map(|(i, p)| match p.prediction.verdict {
            Verdict::NeedsMoreSeasons { seasons: Some(n) } => Some((i, n)),
            _ => None,
        })
        .collect();
    let floors: Vec<f64> = plans
        .iter()
        .filter_map(|p| match p.prediction.verdict {
            Verdict::LimitedByFloor { floor_pct } => Some(floor_pct),
            _ => None,
        })
        .collect();
    let reachable: Vec<usize> = plans
        .iter()
        .filter(|p| p.prediction.verdict == Verdict::Reachable)
        .map(|p| p.seasons_available)
        .collect();
    // Never "needs more seasons" from one range and "floor" from another.
    assert!(
        needs.is_empty() || floors.is_empty(),
        "{what}: needs {needs:?} and floor {floors:?} for the same goal {goal_pct} %"
    );
    // A floor above the goal over the horizon leaves no shorter range reaching it.
    assert!(
        floors.is_empty() || reachable.is_empty(),
        "{what}: floor {floors:?} yet reachable in a range of {reachable:?} seasons"
    );
    // The floor is the target's, not the range's: the repeated year differs
    // from a real one only by the year-to-year drift of the nights.
    for f in &floors {
        assert!(
            (f / floors[0] - 1.0).abs() < 0.03,
            "{what}: floors {floors:?}"
        );
    }
    // The season count does not depend on where the range stops (one season
    // of slack: a range may end inside a season, which the count then completes).
    for (_, n) in &needs {
        assert!(n.abs_diff(needs[0].1) <= 1, "{what}: counts {needs:?}");
    }
    // A range that holds a needed count of seasons reaches the goal, and one that
    // reaches it holds about that many.
    for (i, n) in &needs {
        for s in &reachable {
            assert!(
                *n as usize <= s + 1,
                "{what}: needs {n} yet {s} seasons reach it"
            );
        }
        assert!(
            *n as usize >= plans[*i].seasons_available,
            "{what}: needs {n} with {} seasons in the range",
            plans[*i].seasons_available
        );
    }
}

#[test]
fn verdicts_agree_across_ranges_for_each_demo_target_and_goal() {
    let (site, ts, em) = demo();
    for name in ["LPO-P02", "LPO-P05"] {
        let t = target(&ts, name);
        let own = t.goal_pct.unwrap();
        let plans: Vec<ParallaxPlan> = TO.iter().map(|to| goal(&site, t, &em, to, own)).collect();
        for (p, to) in plans.iter().zip(TO) {
            check_one(p, own, &format!("{name} to {to} at {own} %"));
        }
        check_across(&plans, own, &format!("{name} at {own} %"));
        // A goal below the target's floor: a floor verdict from every range, and
        // the same floor.
        let floor = plans
            .iter()
            .find_map(|p| p.reach.as_ref().and_then(|r| r.floor_pct))
            .unwrap_or_else(|| {
                // Reachable in every range: the floor from an impossible goal.
                goal(&site, t, &em, TO[0], 1e-3)
                    .reach
                    .and_then(|r| r.floor_pct)
                    .unwrap()
            });
        let hard = 0.8 * floor;
        let plans: Vec<ParallaxPlan> = TO.iter().map(|to| goal(&site, t, &em, to, hard)).collect();
        for (p, to) in plans.iter().zip(TO) {
            let what = format!("{name} to {to} at {hard:.2} %");
            check_one(p, hard, &what);
            assert!(
                matches!(p.prediction.verdict, Verdict::LimitedByFloor { .. }),
                "{what}: {:?}",
                p.prediction.verdict
            );
        }
        check_across(&plans, hard, &format!("{name} at {hard:.2} %"));
    }
}

/// The reported case: LPO-P02 at its 3 % goal said "needs 13 seasons" over
/// eighteen months and "floor 5.1 %" over three years. Now both say the same
/// count, and a range that really holds that many seasons (real nights, not
/// repeated ones) reaches the goal in the goal search itself.
#[test]
fn the_season_count_is_what_a_range_of_that_many_seasons_reaches() {
    let (site, ts, em) = demo();
    let t = target(&ts, "LPO-P02");
    let g = t.goal_pct.unwrap();
    let short = goal(&site, t, &em, TO[1], g);
    let long = goal(&site, t, &em, TO[2], g);
    let (
        Verdict::NeedsMoreSeasons { seasons: Some(a) },
        Verdict::NeedsMoreSeasons { seasons: Some(b) },
    ) = (&short.prediction.verdict, &long.prediction.verdict)
    else {
        panic!(
            "expected season counts, got {:?} and {:?}",
            short.prediction.verdict, long.prediction.verdict
        );
    };
    assert_eq!(a, b);
    let by = long.reach.as_ref().unwrap().reached_by.unwrap();
    let m = ParallaxMethod::builtin().unwrap();
    let s = Setting {
        site: &site,
        target: t,
        from: d(FROM),
        to: by,
        limits: limits(),
    };
    let p = m.goal_plan(&s, &em, g).unwrap();
    assert_eq!(
        p.prediction.verdict,
        Verdict::Reachable,
        "{:?}",
        p.prediction.notes
    );
    assert!(p.prediction.distance_precision_pct <= g);
    let used = p.epochs.iter().map(|e| e.season).max().unwrap();
    assert!(used as u32 <= *a + 1, "{used} seasons used, {a} predicted");
}
