//! The observing log: marks go to the log before the plan, a torn last line
//! is tolerated, a mark whose plan save was cut by a kill is applied when the
//! plan is next opened, and the plan can be rebuilt from the log alone.

use rung::plan::file::{self, PlanFile};
use rung::plan::log::{self, Event};
use rung::plan::schedule::Status;
use std::path::Path;
use std::process::Command;

const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo/targets.csv");
const NOW: &str = "2026-12-01T23:30:00Z";

fn rung(dir: &Path, args: &[&str]) -> (String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(dir)
        .env("RUNG_CONFIG_DIR", dir)
        .env("RUNG_NOW", NOW)
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout).into_owned();
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert!(o.status.success(), "{args:?}: {err}");
    (out, err)
}

/// A three-night plan of the demo programme saved in `dir` (its log started).
fn make_plan(dir: &Path) -> PlanFile {
    rung(
        dir,
        &[
            "plan",
            "--targets",
            DEMO,
            "--from",
            "2026-12-01",
            "--to",
            "2026-12-03",
            "--horizon-to",
            "2026-12-03",
            "--hours-per-night",
            "6",
            "--save",
            "p.json",
        ],
    );
    file::load(&dir.join("p.json")).unwrap()
}

#[test]
fn marks_go_to_the_log_and_the_plan_and_the_plan_rebuilds_from_the_log() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let first = p
        .visits
        .iter()
        .find(|v| v.status == Status::Planned)
        .unwrap()
        .id
        .clone();
    let second = p
        .visits
        .iter()
        .filter(|v| v.status == Status::Planned)
        .nth(1)
        .unwrap()
        .id
        .clone();
    rung(
        d,
        &[
            "plan",
            "--load",
            "p.json",
            "--done",
            &first,
            "--observed",
            "2026-12-02T01:10:00Z",
            "--seeing",
            "1.3",
            "--comment",
            "thin cirrus, fine",
        ],
    );
    rung(d, &["plan", "--load", "p.json", "--lost", &second]);
    rung(
        d,
        &[
            "plan",
            "--load",
            "p.json",
            "--lost-night",
            "2026-12-02",
            "--replan",
        ],
    );
    let p = file::load(&d.join("p.json")).unwrap();
    let v = p.visits.iter().find(|v| v.id == first).unwrap();
    assert_eq!(v.status, Status::Done);
    assert_eq!(v.seeing_arcsec, Some(1.3));
    assert_eq!(v.comment.as_deref(), Some("thin cirrus, fine"));
    assert_eq!(v.observed.unwrap().iso(), "2026-12-02T01:10:00Z");
    assert_eq!(
        p.visits.iter().find(|v| v.id == second).unwrap().status,
        Status::Lost
    );
    assert!(p.lost_nights.contains(&"2026-12-02".parse().unwrap()));
    // The log holds every mark, in order, and the plan knows how many.
    let entries = log::read(&d.join("p.log.csv")).unwrap();
    let kinds: Vec<&str> = entries
        .iter()
        .map(|e| match e.event {
            Event::Plan(_) => "plan",
            Event::Done(_) => "done",
            Event::Lost(_) => "lost",
            Event::LostNight(_) => "lost_night",
            Event::Replan { .. } => "replan",
        })
        .collect();
    assert_eq!(kinds, ["plan", "done", "lost", "lost_night", "replan"]);
    assert_eq!(p.log_seq, 5);
    // The plan rebuilt from the log alone equals the saved one.
    rung(d, &["plan", "--rebuild", "p.log.csv", "--save", "q.json"]);
    let q = file::load(&d.join("q.json")).unwrap();
    assert_eq!(q.visits, p.visits);
    assert_eq!(q.lost_nights, p.lost_nights);
}

#[test]
fn a_mark_logged_before_a_kill_is_applied_when_the_plan_is_opened() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let path = d.join("p.json");
    let id = p.visits[0].id.clone();
    // The log row is written, the plan save never happens (the process was killed).
    let mut v = p.visits[0].clone();
    v.status = Status::Done;
    let now = rung::astro::time::parse_instant(NOW).unwrap();
    log::append(&log::log_path(&path), &p, Event::Done(Box::new(v)), now).unwrap();
    assert_eq!(file::load(&path).unwrap().visits[0].status, Status::Planned);
    // The next command applies it.
    let (_, err) = rung(d, &["plan", "--load", "p.json", "--json"]);
    assert!(err.contains("applied 1 mark"), "{err}");
    let p = file::load(&path).unwrap();
    assert_eq!(
        p.visits.iter().find(|v| v.id == id).unwrap().status,
        Status::Done
    );
}

#[test]
fn a_torn_last_line_is_ignored_and_the_next_row_starts_on_its_own_line() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let path = d.join("p.json");
    let lp = log::log_path(&path);
    let before = log::read(&lp).unwrap().len();
    // A write cut by a kill: half a row, no line end.
    use std::io::Write;
    let mut f = std::fs::OpenOptions::new().append(true).open(&lp).unwrap();
    f.write_all(b"2,2026-12-02T01:00:00Z,done,LPO-P01#1,LPO-P0")
        .unwrap();
    drop(f);
    assert_eq!(log::read(&lp).unwrap().len(), before);
    let now = rung::astro::time::parse_instant(NOW).unwrap();
    let mut p2 = p.clone();
    log::mark_lost(&path, &mut p2, &p.visits[0].id, now).unwrap();
    let entries = log::read(&lp).unwrap();
    assert_eq!(entries.len(), before + 1);
    assert!(matches!(entries.last().unwrap().event, Event::Lost(_)));
    // The torn text stays in the file, on a line of its own that is not read.
    let text = std::fs::read_to_string(&lp).unwrap();
    assert!(text.contains("LPO-P0\n"), "{text}");
}

#[test]
fn a_bad_log_row_names_its_file_line_and_field() {
    let dir = tempfile::tempdir().unwrap();
    let lp = dir.path().join("x.log.csv");
    std::fs::write(
        &lp,
        format!(
            "{}\n1,2026-12-02T01:00:00Z,dance,,,,,,,\n",
            log::HEADER.join(",")
        ),
    )
    .unwrap();
    let e = log::read(&lp).unwrap_err().to_string();
    assert!(
        e.contains("x.log.csv") && e.contains("line 2") && e.contains("'event'"),
        "{e}"
    );
    assert!(e.contains("'dance' is not a log event"), "{e}");
}
