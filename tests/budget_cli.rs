//! `rung budget` on the demo programme as an observer runs it: the hours
//! asked below and above the programme's need meet different goals, the
//! allocation never exceeds the hours asked, the weather and overheads are
//! stated, and every target's σd/d-against-hours curve is in the JSON.

mod demo_support;

use serde_json::Value;
use std::process::{Command, Output};

fn rung(args: &[&str]) -> Output {
    let cfg = tempfile::tempdir().unwrap();
    Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", cfg.path())
        .output()
        .unwrap()
}

const DEMO: [&str; 6] = [
    "--targets",
    "targets-demo/targets.csv",
    "--from",
    "2026-12-01",
    "--to",
    "2028-05-31",
];

fn budget_json(extra: &[&str]) -> Value {
    let mut args = vec!["budget"];
    args.extend(DEMO);
    args.extend(extra);
    args.push("--json");
    let o = rung(&args);
    assert!(
        o.status.success() || o.status.code() == Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_slice(&o.stdout).unwrap()
}

fn met(v: &Value) -> Vec<String> {
    v["allocation"]["shares"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| s["goal_met"] == true)
        .map(|s| s["target"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn hours_below_and_above_the_need_meet_different_goals() {
    // Two hours: below the need of the goals reachable in these eighteen
    // months (parallax goals need the two-year baseline, so only the
    // pulsators' and the supernova's are reachable here).
    let low = budget_json(&["--hours", "2"]);
    let need = low["total_hours_expected"].as_f64().unwrap();
    let high = budget_json(&["--hours", &format!("{}", (need * 1.2).ceil())]);
    let (ml, mh) = (met(&low), met(&high));
    assert!(!ml.is_empty() && ml.len() < mh.len(), "{ml:?} vs {mh:?}");
    // Above the need every goal reachable in the range is met.
    let reachable: Vec<String> = high["rows"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["verdict_label"] == "reachable" && r["epochs"].as_u64().unwrap() > 0)
        .map(|r| r["target"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(mh, reachable);
    for v in [&low, &high] {
        let a = &v["allocation"];
        let asked = a["hours_asked"].as_f64().unwrap();
        let used = a["hours_allocated"].as_f64().unwrap();
        assert!(used <= asked + 1e-9, "{used} > {asked}");
        assert!((a["hours_left"].as_f64().unwrap() - (asked - used)).abs() < 1e-9);
        assert_eq!(a["proven_optimal"], true);
        // The shares and the calibrations add up to what is allocated.
        let shares: f64 = a["shares"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["hours"].as_f64().unwrap())
            .sum();
        let cal = a["calibration_hours"].as_f64().unwrap();
        assert!(
            (shares + cal - used).abs() < 1e-6,
            "{shares} + {cal} vs {used}"
        );
        // A goal met reaches what the budget row reaches.
        for (s, r) in a["shares"]
            .as_array()
            .unwrap()
            .iter()
            .zip(v["rows"].as_array().unwrap())
        {
            assert_eq!(s["target"], r["target"]);
            if s["goal_met"] == true {
                assert_eq!(s["reaches_pct"], r["achievable_pct"]);
                assert_eq!(s["hours"], r["hours_expected"]);
            }
        }
    }
    // The marginal gain: the next step beyond 2 h is above 2 h and adds a goal.
    let next = &low["allocation"]["next"];
    assert!(next["hours"].as_f64().unwrap() > 2.0);
    assert!(!next["adds"].as_array().unwrap().is_empty());
}

#[test]
fn every_target_has_its_inverse_curve_from_zero_hours() {
    let v = budget_json(&["--hours", "3"]);
    for r in v["rows"].as_array().unwrap() {
        let c = r["curve"].as_array().unwrap();
        assert_eq!(c[0]["hours"], 0.0);
        assert!(c[0]["distance_precision_pct"].is_null());
        // More hours buy a better precision along the curve.
        for w in c[1..].windows(2) {
            let (a, b) = (&w[0], &w[1]);
            assert!(a["hours"].as_f64() <= b["hours"].as_f64());
            assert!(
                a["distance_precision_pct"].as_f64().unwrap()
                    > b["distance_precision_pct"].as_f64().unwrap()
            );
        }
        // The marginal gain of each point: σd/d won per further clear hour.
        for w in c[1..].windows(2) {
            let (a, b) = (&w[0], &w[1]);
            let dh = b["hours"].as_f64().unwrap() - a["hours"].as_f64().unwrap();
            let dp = a["distance_precision_pct"].as_f64().unwrap()
                - b["distance_precision_pct"].as_f64().unwrap();
            if dh > 0.0 {
                let g = b["gain_pct_per_hour"].as_f64().unwrap();
                assert!(
                    (g - dp / dh).abs() < 1e-9 * g.abs().max(1.0),
                    "{g} vs {}",
                    dp / dh
                );
            }
        }
        if c.len() > 1 {
            assert!(c[1]["gain_pct_per_hour"].is_null());
        }
        // With the weather the same plan takes more hours: at most 1/min(f).
        let fmin = v["weather"]["clear_fraction"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .fold(1.0, f64::min);
        for p in c {
            let (h, e) = (
                p["hours"].as_f64().unwrap(),
                p["hours_expected"].as_f64().unwrap(),
            );
            assert!(e >= h - 1e-9 && e <= h / fmin + 1e-9, "{h} {e}");
        }
        // A target that reaches its goal has its goal's plan on the curve.
        if r["verdict_label"] == "reachable" && r["epochs"].as_u64().unwrap() > 0 {
            assert!(
                c.iter().any(|p| p["hours"] == r["hours"]
                    && p["distance_precision_pct"] == r["achievable_pct"]),
                "{}",
                r["target"]
            );
        }
    }
    // The weather and the overheads are stated.
    assert_eq!(v["weather"]["clear_fraction"].as_array().unwrap().len(), 12);
    assert_eq!(v["overheads"]["calibration_s_per_night"], 300.0);
    // The goals-met curve climbs.
    let steps = v["allocation"]["steps"].as_array().unwrap();
    assert!(steps.len() >= 5);
    assert_eq!(&v["goals_met_curve"], &v["allocation"]["steps"]);
    // Every goal not met says what stops it: a term or a constraint.
    let rows = v["rows"].as_array().unwrap();
    for (s, r) in v["allocation"]["shares"]
        .as_array()
        .unwrap()
        .iter()
        .zip(rows)
    {
        let by = s["limited_by"].as_str().unwrap();
        let limit = s["limit"].as_str().unwrap();
        if s["goal_met"] == true {
            assert!(by.is_empty() && limit.is_empty());
            continue;
        }
        assert!(!limit.is_empty(), "{s}");
        match r["verdict_label"].as_str().unwrap() {
            "reachable" => assert_eq!(by, "hours_asked", "{s}"),
            "floor" => {
                // The largest term of the row's error budget, named with its share.
                assert_eq!(by, "error_term", "{s}");
                let top = r["error_terms"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .max_by(|a, b| {
                        a["distance_pct"]
                            .as_f64()
                            .unwrap()
                            .total_cmp(&b["distance_pct"].as_f64().unwrap())
                    })
                    .unwrap();
                let name = top["name"].as_str().unwrap();
                assert!(limit.contains(&format!("'{name}'")), "{limit}");
                let pct = top["distance_pct"].as_f64().unwrap();
                assert!(pct <= r["achievable_pct"].as_f64().unwrap() + 1e-9);
                assert!(limit.contains(&format!("{pct:.1} % alone")), "{limit}");
            }
            "more_seasons" => assert_eq!(by, "range", "{s}"),
            "not_observable" => assert_eq!(by, "visibility", "{s}"),
            other => panic!("verdict {other}"),
        }
        // Out of reach, the row says the same without hours asked.
        if r["verdict_label"] != "reachable" {
            assert_eq!(r["limited_by"], s["limited_by"]);
            assert_eq!(r["limit"], s["limit"]);
        }
    }
    // A goal the hours do not buy: its hours are more than the goals met leave.
    let s = v["allocation"]["shares"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["limited_by"] == "hours_asked")
        .expect("3 h leave a reachable goal out");
    let nums: Vec<f64> = s["limit"]
        .as_str()
        .unwrap()
        .split(' ')
        .filter_map(|w| w.parse().ok())
        .collect();
    assert_eq!(nums.len(), 2, "{s}");
    assert!(nums[0] > nums[1], "{s}");
}

#[test]
fn the_goals_met_curve_and_the_inverse_curves_without_hours_asked() {
    // Lean: three targets, the demo range.
    let cfg = tempfile::tempdir().unwrap();
    let prog =
        demo_support::demo_subset(cfg.path(), "three.csv", &["LPO-C03", "LPO-C06", "LPO-C09"]);
    let args = |extra: &[&str]| -> Vec<String> {
        let mut a: Vec<String> = [
            "budget",
            "--site",
            "pampa-lucero",
            "--targets",
            prog.to_str().unwrap(),
            "--from",
            "2026-12-01",
            "--to",
            "2028-05-31",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect();
        a.extend(extra.iter().map(|s| s.to_string()));
        a
    };
    let run = |extra: &[&str]| -> Output {
        let a = args(extra);
        let r: Vec<&str> = a.iter().map(|s| s.as_str()).collect();
        rung(&r)
    };
    let v: Value = serde_json::from_slice(&run(&["--json"]).stdout).unwrap();
    assert!(v["allocation"].is_null());
    let steps = v["goals_met_curve"].as_array().unwrap();
    assert!(!steps.is_empty() && steps.len() <= 3, "{steps:?}");
    // Each further step takes more hours; the last meets all three goals.
    for w in steps.windows(2) {
        assert!(w[0]["hours"].as_f64() < w[1]["hours"].as_f64());
    }
    let last = steps.last().unwrap();
    assert_eq!(last["goals_met"], 3);
    // Every goal is met from the programme's total expected need on.
    assert!(last["hours"].as_f64().unwrap() <= v["total_hours_expected"].as_f64().unwrap() + 1e-6);
    // The text shows the same curves and steps, number for number.
    let o = run(&["--curves"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let t = String::from_utf8(o.stdout).unwrap();
    let n1 = |x: &Value| rung::output::num(x.as_f64().unwrap(), 1);
    let n2 = |x: &Value| rung::output::num(x.as_f64().unwrap(), 2);
    for s in steps {
        let line = format!(
            "{} h  {:>3} goals",
            n1(&s["hours"]),
            s["goals_met"].as_u64().unwrap()
        );
        assert!(t.contains(&line), "{line} not in\n{t}");
    }
    for r in v["rows"].as_array().unwrap() {
        let name = r["target"].as_str().unwrap();
        let from = t.find(&format!("  {name} (goal")).unwrap();
        let block = &t[from..];
        for p in r["curve"].as_array().unwrap().iter().skip(1) {
            let line = format!(
                "{:>8} {:>8} {:>8}",
                n2(&p["hours"]),
                n2(&p["hours_expected"]),
                n2(&p["distance_precision_pct"])
            );
            assert!(block.contains(&line), "{name}: {line} not in\n{block}");
        }
    }
}
