//! The Next view in a real terminal (tmux, 80×24): open the queue, mark a
//! visit done with seeing and a comment, re-plan, quit; the plan file and its
//! observing log hold the change. Then a kill -9 right after a mark: the plan
//! file and the log still read, and every mark the log holds is in the plan
//! once it is opened again. Skipped with a message when tmux is not installed.

use std::path::Path;
use std::process::Command;

const DEMO_DIR: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo");
const NOW: &str = "2026-12-02T01:00:00Z";

mod tmux_support;
use tmux_support::Tmux;

fn rung(dir: &Path, args: &[&str]) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(dir)
        .env("RUNG_CONFIG_DIR", dir)
        .env("RUNG_NOW", NOW)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn ui(dir: &Path) -> Option<Tmux> {
    let bin = env!("CARGO_BIN_EXE_rung");
    let t = Tmux::start(&format!(
        "cd '{}' && RUNG_CONFIG_DIR='{}' RUNG_NOW={NOW} NO_COLOR=1 '{bin}' tui --targets targets.csv --plan plan.json; echo RUNG-EXIT-$?; sleep 120",
        dir.display(),
        dir.display()
    ))?;
    t.wait_for("Roster");
    t.send("8");
    t.wait_for("Now 01:00 UTC");
    Some(t)
}

/// The rank (1-based) of the first row of the queue with a planned visit, and its id.
fn first_visit(dir: &Path) -> (usize, String) {
    let q: serde_json::Value =
        serde_json::from_str(&rung(dir, &["next", "--plan", "plan.json", "--json"])).unwrap();
    q["rows"]
        .as_array()
        .unwrap()
        .iter()
        .find_map(|r| {
            r["visit_id"]
                .as_str()
                .map(|id| (r["rank"].as_u64().unwrap() as usize, id.to_string()))
        })
        .expect("a planned visit tonight")
}

fn select(t: &Tmux, rank: usize) {
    for _ in 1..rank {
        t.send("Down");
    }
}

#[test]
fn mark_done_replan_and_quit_then_a_kill_during_a_mark() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // A copy of the demo programme: the UI locks the programme it opens, and
    // the kill -9 below leaves that lock behind (in the temporary folder).
    for f in ["targets.csv", "targets.settings.toml"] {
        std::fs::copy(Path::new(DEMO_DIR).join(f), d.join(f)).unwrap();
    }
    rung(
        d,
        &[
            "plan",
            "--targets",
            "targets.csv",
            "--from",
            "2026-12-01",
            "--to",
            "2026-12-03",
            "--horizon-to",
            "2026-12-31",
            "--hours-per-night",
            "7",
            "--save",
            "plan.json",
        ],
    );
    let (rank, id) = first_visit(d);
    let Some(t) = ui(d) else { return };
    select(&t, rank);
    t.send("D");
    t.wait_for("snr= and comment");
    t.send("1.1 clear and steady");
    t.send("Enter");
    t.wait_for(&format!("{id} done"));
    t.send("R");
    t.wait_for("re-planned");
    t.send("q");
    t.wait_for("RUNG-EXIT-0");
    drop(t);
    let p = rung::plan::file::load(&d.join("plan.json")).unwrap();
    let v = p.visits.iter().find(|v| v.id == id).unwrap();
    assert_eq!(v.status, rung::plan::schedule::Status::Done);
    assert_eq!(v.seeing_arcsec, Some(1.1));
    assert_eq!(v.comment.as_deref(), Some("clear and steady"));
    let log = rung::plan::log::read(&d.join("plan.log.csv")).unwrap();
    assert!(
        log.iter()
            .any(|e| matches!(&e.event, rung::plan::log::Event::Done(x) if x.id == id))
    );
    assert!(
        log.iter()
            .any(|e| matches!(e.event, rung::plan::log::Event::Replan { .. }))
    );
    assert_eq!(p.log_seq, log.last().unwrap().seq);

    // A kill -9 right after the next mark.
    let (rank, id2) = first_visit(d);
    assert_ne!(id2, id);
    let Some(t) = ui(d) else { return };
    select(&t, rank);
    t.send("D");
    t.wait_for("snr= and comment");
    t.send("Enter");
    if let Some(pid) = t.rung_pid() {
        let _ = Command::new("kill").args(["-9", &pid]).status();
    }
    t.wait_for("RUNG-EXIT-");
    drop(t);
    // Both files read; every mark in the log is in the plan once it is opened.
    let log = rung::plan::log::read(&d.join("plan.log.csv")).unwrap();
    rung(d, &["plan", "--load", "plan.json", "--json"]);
    let p = rung::plan::file::load(&d.join("plan.json")).unwrap();
    for e in &log {
        if let rung::plan::log::Event::Done(x) = &e.event {
            assert_eq!(
                p.visits.iter().find(|v| v.id == x.id).map(|v| v.status),
                Some(rung::plan::schedule::Status::Done),
                "{} is done in the log but not in the plan",
                x.id
            );
        }
    }
    assert_eq!(p.log_seq, log.last().unwrap().seq);
}
