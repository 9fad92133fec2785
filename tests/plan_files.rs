//! Plan files and budget input checks: bad input gets a clear message and
//! nothing is overwritten.

use rung::io::targets::Target;
use rung::plan::file::{FORMAT, PlanFile, load, parse, save};
use rung::plan::schedule::{Status, fingerprint};
use std::path::Path;

fn plan_for(ts: &[Target]) -> PlanFile {
    PlanFile {
        format: FORMAT.into(),
        site: "pampa-lucero".into(),
        targets_file: "a.csv".into(),
        targets_fingerprint: fingerprint(ts),
        from: "2026-12-01".parse().unwrap(),
        to: "2026-12-05".parse().unwrap(),
        hours_per_night: 4.0,
        min_alt_deg: 30.0,
        sun_alt_deg: -12.0,
        instrument: None,
        lost_nights: Default::default(),
        visits: vec![],
        horizon_to: None,
        log_seq: 0,
    }
}

#[test]
fn plan_from_another_targets_list_is_refused() {
    let a = vec![Target::plain("A", 10.0, -20.0)];
    let b = vec![Target::plain("B", 10.0, -20.0)];
    let p = plan_for(&a);
    assert!(p.check_targets(&a, Path::new("p.json")).is_ok());
    let e = p
        .check_targets(&b, Path::new("p.json"))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("p.json")
            && e.contains("another targets list")
            && e.contains("Nothing was changed"),
        "{e}"
    );
}

#[test]
fn broken_plan_names_line_and_is_not_overwritten() {
    let d = tempfile::tempdir().unwrap();
    let path = d.path().join("plan.json");
    let ts = vec![Target::plain("A", 10.0, -20.0)];
    save(&plan_for(&ts), &path).unwrap();
    let good = std::fs::read_to_string(&path).unwrap();
    let broken = good.replacen("\"hours_per_night\": 4.0", "\"hours_per_night\": four", 1);
    std::fs::write(&path, &broken).unwrap();
    let want_line = broken.lines().position(|l| l.contains("four")).unwrap() + 1;
    let e = load(&path).unwrap_err().to_string();
    assert!(
        e.contains("plan.json") && e.contains(&format!("line {want_line}")),
        "{e}"
    );
    assert_eq!(
        std::fs::read_to_string(&path).unwrap(),
        broken,
        "a failed load must not touch the file"
    );
    let e = parse(&good.replace(FORMAT, "other/9"), &path)
        .unwrap_err()
        .to_string();
    assert!(e.contains("format"), "{e}");
}

#[test]
fn marking_an_unknown_visit_is_an_error() {
    let ts = vec![Target::plain("A", 10.0, -20.0)];
    let mut p = plan_for(&ts);
    let e = p
        .mark(&["A#9".into()], Status::Done)
        .unwrap_err()
        .to_string();
    assert!(e.contains("unknown visit 'A#9'"), "{e}");
}

#[test]
fn goals_must_be_positive_percentages() {
    for g in [0.0, -3.0, f64::NAN, 150.0] {
        assert!(rung::plan::budget::check_goal(g).is_err(), "{g}");
    }
    assert!(rung::plan::budget::check_goal(3.0).is_ok());
}

#[test]
fn semesters_follow_common_practice() {
    use rung::plan::budget::semester;
    // Common practice (many observatories): A = Feb–Jul, B = Aug–Jan.
    assert_eq!(semester("2027-01-15".parse().unwrap()), "2026B");
    assert_eq!(semester("2027-02-01".parse().unwrap()), "2027A");
    assert_eq!(semester("2027-07-31".parse().unwrap()), "2027A");
    assert_eq!(semester("2027-08-01".parse().unwrap()), "2027B");
}

#[test]
fn replanned_visits_never_reuse_an_id() {
    use rung::plan::schedule::Visit;
    let ts = vec![Target::plain("A", 10.0, -20.0)];
    let t0 = rung::astro::time::parse_instant("2026-12-02T03:00:00Z").unwrap();
    let visit = |id: &str, k: f64, status: Status| Visit {
        id: id.into(),
        target: "A".into(),
        kind: rung::io::targets::Kind::Parallax,
        night: "2026-12-01".parse().unwrap(),
        start: t0.add_seconds(k * 600.0),
        end: t0.add_seconds(k * 600.0 + 300.0),
        exptime_s: 100.0,
        n_exposures: 1,
        snr: 50.0,
        airmass: 1.1,
        status,
        cautions: vec![],
        exposures: vec![],
        ra_deg: None,
        dec_deg: None,
        observed: None,
        seeing_arcsec: None,
        comment: None,
        snr_measured: Default::default(),
    };
    let mut p = plan_for(&ts);
    p.visits = vec![
        visit("A#1", 0.0, Status::Done),
        visit("A#2", 1.0, Status::Lost),
    ];
    // The re-plan numbers its new visit A#2 again, as the scheduler counts done visits only.
    p.replace_visits(vec![
        visit("A#1", 0.0, Status::Done),
        visit("A#2", 3.0, Status::Planned),
    ]);
    let ids: Vec<&str> = p.visits.iter().map(|v| v.id.as_str()).collect();
    assert_eq!(ids, ["A#1", "A#2", "A#3"]);
    assert_eq!(p.visits[1].status, Status::Lost);
    assert_eq!(p.visits[2].status, Status::Planned);
    let d = tempfile::tempdir().unwrap();
    let path = d.path().join("p.json");
    save(&p, &path).unwrap();
    assert!(load(&path).is_ok());
}

/// An unknown key's message lists every key a plan file holds, whole, and
/// cuts the file's own text (the key found) at 60 characters.
#[test]
fn an_unknown_key_names_every_key_whole_and_cuts_only_the_files_text() {
    let long = "k".repeat(500);
    let text = format!("{{\n  \"format\": \"rung-plan/1\",\n  \"{long}\": 1\n}}\n");
    let e = rung::plan::file::parse(&text, std::path::Path::new("p.json"))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains(&format!("unknown field `{}…`", "k".repeat(60))),
        "{e}"
    );
    assert!(e.ends_with("`visits`, `horizon_to`, `log_seq`"), "{e}");
}
