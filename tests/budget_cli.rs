//! `rung budget` on the demo programme as an observer runs it: the hours
//! asked below and above the programme's need meet different goals, the
//! allocation never exceeds the hours asked, the weather and overheads are
//! stated, and every target's σd/d-against-hours curve is in the JSON.

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
    let v = budget_json(&["--hours", "30"]);
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
}
