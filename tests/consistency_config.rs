//! A user's method file changes every surface alike (#14 Must show): a
//! `pulsator.toml` in the user config folder (`$RUNG_CONFIG_DIR`) that
//! narrows the V-band period–luminosity scatter and asks for 12 phase bins
//! changes `rung budget`, `rung phase` and the UI's Budget view the same
//! way. (`rung budget` used to build its methods from the built-in
//! configuration while `rung phase` and the UI read the user's file.)

#[path = "tui_support.rs"]
mod support;

use rung::programme::{Request, Settings};
use rung::tui::effects::open;
use serde_json::Value;
use std::path::Path;
use std::process::Command;
use support::*;

/// Two pulsators of the demo programme, with the demo's settings file.
fn programme(dir: &Path) -> std::path::PathBuf {
    let demo = std::fs::read_to_string(demo_file()).unwrap();
    let keep: String = demo
        .lines()
        .filter(|l| l.starts_with('#') || l.starts_with("name,") || l.starts_with("LPO-C0"))
        .filter(|l| {
            !l.starts_with("LPO-C0") || l.starts_with("LPO-C03") || l.starts_with("LPO-C05")
        })
        .map(|l| format!("{l}\n"))
        .collect();
    let file = dir.join("mine.csv");
    std::fs::write(&file, keep).unwrap();
    std::fs::copy(
        demo_file().with_file_name("targets.settings.toml"),
        dir.join("mine.settings.toml"),
    )
    .unwrap();
    file
}

fn rung(cfg: &Path, args: &[&str]) -> Value {
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .env("RUNG_CONFIG_DIR", cfg)
        .env("RUNG_NOW", "2026-12-02T01:00:00Z")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "rung {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// What each surface says about one pulsator, as text: (budget, phase, UI).
struct Seen {
    budget: Value,
    phase: Value,
    ui_row: String,
}

fn surfaces(cfg: &Path, prog: &Path, name: &str) -> Seen {
    let p = prog.to_str().unwrap();
    let budget = rung(cfg, &["budget", "--targets", p, "--json"]);
    let row = budget["rows"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["target"] == name)
        .unwrap()
        .clone();
    let phase = rung(cfg, &["phase", "--targets", p, "--target", name, "--json"]);
    // The UI as `rung tui --targets FILE` opens it, with the same user folder.
    // SAFETY: the tests of this binary hold ENV while they use the variable.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg) };
    let settings = Settings::resolve(
        &Request {
            programme: Some(prog.to_path_buf()),
            ..Default::default()
        },
        test_now(),
    )
    .unwrap();
    let targets = rung::io::targets::load(prog).unwrap().targets;
    let mut setup = setup_with(
        targets,
        Some(prog.into()),
        prog.into(),
        false,
        (120, 30),
        false,
    );
    setup.settings = settings;
    let mut s = open(setup);
    ch(&mut s, '7');
    let (rows, _) = screen(&s, 120, 30);
    let ui_row = row_of(&rows, name).to_string();
    Seen {
        budget: row,
        phase,
        ui_row,
    }
}

/// Held by each test while it sets and uses `RUNG_CONFIG_DIR`.
static ENV: std::sync::Mutex<()> = std::sync::Mutex::new(());

#[test]
fn a_users_pulsator_file_changes_budget_phase_and_the_ui_alike() {
    let _env = ENV.lock().unwrap_or_else(|e| e.into_inner());
    let name = "LPO-C05";
    let work = tempfile::tempdir().unwrap();
    let prog = programme(work.path());
    let plain = tempfile::tempdir().unwrap();
    let user = tempfile::tempdir().unwrap();
    std::fs::write(
        user.path().join("pulsator.toml"),
        "# a narrower V-band relation and finer phase bins\n[defaults]\nbins = 12\n\n[relation.cepheid.V]\nscatter_mag = 0.05\n",
    )
    .unwrap();

    let before = surfaces(plain.path(), &prog, name);
    let after = surfaces(user.path(), &prog, name);

    for seen in [&before, &after] {
        // rung phase and rung budget agree, to the last bit.
        let (b, p) = (&seen.budget, &seen.phase);
        assert_eq!(p["distance_precision_pct"], b["achievable_pct"]);
        assert_eq!(p["hours_needed"], b["hours"]);
        assert_eq!(p["verdict"], b["verdict"]);
        assert_eq!(p["visits"].as_array().unwrap().len() as u64, b["epochs"]);
        // And the UI's Budget view shows them.
        let reach = format!("{:.1}%", b["achievable_pct"].as_f64().unwrap());
        assert!(seen.ui_row.contains(&reach), "{reach}: {}", seen.ui_row);
        let hours = format!("{:.1}", b["hours"].as_f64().unwrap());
        assert!(seen.ui_row.contains(&hours), "{hours}: {}", seen.ui_row);
        assert!(
            seen.ui_row.contains(b["verdict"]["text"].as_str().unwrap()),
            "{}",
            seen.ui_row
        );
    }
    // The user's file took effect on every surface: 12 bins, and the floor
    // set by the narrower scatter (σ_PL 0.21 → 0.05 mag in V).
    assert_eq!(before.phase["bins"], 10);
    assert_eq!(after.phase["bins"], 12);
    let floor = |s: &Seen| s.phase["floor_pct"].as_f64().unwrap();
    assert!(
        floor(&after) < floor(&before) / 2.0,
        "floor {} → {}",
        floor(&before),
        floor(&after)
    );
    let reach = |s: &Seen| s.budget["achievable_pct"].as_f64().unwrap();
    assert!(reach(&after) < reach(&before) / 2.0);
    assert_ne!(before.ui_row, after.ui_row);
    // The verdict's wording follows on every surface (checked above for
    // each): the floor the built-in relation sets (its scatter alone is
    // 0.21 mag, about 9.7 % in distance) is not the user's.
    assert_ne!(before.budget["verdict"], after.budget["verdict"]);
}

#[test]
fn a_goal_not_given_by_the_target_is_the_budgets_in_the_roster() {
    let _env = ENV.lock().unwrap_or_else(|e| e.into_inner());
    let work = tempfile::tempdir().unwrap();
    let cfg = tempfile::tempdir().unwrap();
    // A parallax target and a supernova without goal_pct; the programme's
    // settings give 5 %, and the supernova method's default is its own.
    let demo = std::fs::read_to_string(demo_file()).unwrap();
    let header = demo.lines().find(|l| l.starts_with("name,")).unwrap();
    let goal_col = header.split(',').position(|c| c == "goal_pct").unwrap();
    let mut text = format!("{header}\n");
    for l in demo
        .lines()
        .filter(|l| l.starts_with("LPO-P01,") || l.starts_with("LPO-T2026a,"))
    {
        let mut f: Vec<&str> = l.split(',').collect();
        f[goal_col] = "";
        text.push_str(&f.join(","));
        text.push('\n');
    }
    let prog = work.path().join("nogoal.csv");
    std::fs::write(&prog, text).unwrap();
    // With the programme's goal (5 %) for both, then without: the parallax
    // target has no goal, the supernova its method's default
    // (`default_goal_pct` in config/transient.toml).
    for (programme_goal, want) in [("goal_pct = 5\n", vec![5.0, 5.0]), ("", vec![10.0])] {
        std::fs::write(
            work.path().join("nogoal.settings.toml"),
            format!("[programme]\nfrom = 2026-12-01\nto = 2028-05-31\n{programme_goal}"),
        )
        .unwrap();
        let budget = rung(
            cfg.path(),
            &["budget", "--targets", prog.to_str().unwrap(), "--json"],
        );
        // SAFETY: ENV is held.
        unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
        let settings = Settings::resolve(
            &Request {
                programme: Some(prog.clone()),
                ..Default::default()
            },
            test_now(),
        )
        .unwrap();
        let targets = rung::io::targets::load(&prog).unwrap().targets;
        assert!(targets.iter().all(|t| t.goal_pct.is_none()));
        let mut setup = setup_with(
            targets,
            Some(prog.clone()),
            prog.clone(),
            false,
            (120, 30),
            false,
        );
        setup.settings = settings;
        let s = open(setup);
        let (rows, _) = screen(&s, 120, 30);
        let mut goals = Vec::new();
        for r in budget["rows"].as_array().unwrap() {
            let name = r["target"].as_str().unwrap();
            let goal = r["goal_pct"].as_f64().unwrap();
            let a = r["achievable_pct"].as_f64().unwrap();
            let g = format!("{goal:.1}");
            let want = format!("{a:.1}/{}%", g.trim_end_matches(".0"));
            let line = row_of(&rows, name);
            assert!(line.contains(&want), "{name}: {want} not in {line}");
            goals.push(goal);
        }
        assert_eq!(goals, want, "{budget}");
    }
}
