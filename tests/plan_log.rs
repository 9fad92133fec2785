//! The observing log: marks go to the log before the plan, a torn last line
//! is tolerated, a mark whose plan save was cut by a kill is applied when the
//! plan is next opened, and the plan can be rebuilt from the log alone.

use rung::plan::file::{self, PlanFile};
use rung::plan::log::{self, Event};
use rung::plan::schedule::Status;
use std::path::Path;
use std::process::Command;

mod plan_cli;
use plan_cli::DEMO;
const NOW: &str = "2026-12-01T23:30:00Z";

/// [`plan_cli::run`] at the clock `NOW`.
fn run<S: AsRef<std::ffi::OsStr>>(dir: &Path, args: &[S]) -> (bool, String, String) {
    plan_cli::run(dir, NOW, args)
}

/// [`run`], which must succeed: (stdout, stderr).
fn rung(dir: &Path, args: &[&str]) -> (String, String) {
    let (ok, out, err) = run(dir, args);
    assert!(ok, "{args:?}: {err}");
    (out, err)
}

/// [`run`], which must refuse: its stderr.
fn refused<S: AsRef<std::ffi::OsStr> + std::fmt::Debug>(dir: &Path, args: &[S]) -> String {
    let (ok, _, err) = run(dir, args);
    assert!(!ok, "{args:?} was not refused: {err}");
    err
}

/// A three-night plan of the demo programme saved in `dir` (its log started).
fn make_plan(dir: &Path) -> PlanFile {
    make_plan_to(dir, "2026-12-03")
}

/// [`make_plan`] from 2026-12-01 to the night `to`.
fn make_plan_to(dir: &Path, to: &str) -> PlanFile {
    plan_cli::make_plan(dir, NOW, to, to)
}

#[test]
fn marks_go_to_the_log_and_the_plan_and_the_plan_rebuilds_from_the_log() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let first = first_planned(&p);
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

/// A logged visit out of a plan file's bounds (a mark written by hand or by
/// another program: a measured signal-to-noise of -5, an airmass of 0.5) is
/// refused when the log is read, naming the log, its line and field, before
/// a catch-up could save it into the plan (which its next load would then
/// refuse, naming the plan file); the plan file keeps its bytes
/// (docs/bad-input.md V13).
#[test]
fn a_logged_visit_out_of_bounds_is_named_in_the_log_and_never_saved() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let path = d.join("p.json");
    let before = std::fs::read(&path).unwrap();
    let now = rung::astro::time::parse_instant(NOW).unwrap();
    let mut v = p.visits[0].clone();
    v.status = Status::Done;
    let band = v.exposures[0].band.clone();
    v.snr_measured.insert(band.clone(), -5.0);
    log::append(
        &log::log_path(&path),
        &p,
        Event::Done(Box::new(v.clone())),
        now,
    )
    .unwrap();
    let err = refused(d, &["plan", "--load", "p.json"]);
    let want = format!(
        "p.log.csv, line 3, field 'data': snr_measured: visit '{}': band '{band}': -5 is not within (0, 10000]",
        v.id
    );
    assert!(err.contains(&want), "{err}");
    assert_eq!(std::fs::read(&path).unwrap(), before);
    // The same for a plain bound of a visit (its airmass).
    let lp = log::log_path(&path);
    let text = std::fs::read_to_string(&lp).unwrap();
    let first_rows: String = text.lines().take(2).map(|l| format!("{l}\n")).collect();
    std::fs::write(&lp, &first_rows).unwrap();
    v.snr_measured.clear();
    v.airmass = 0.5;
    log::append(&lp, &p, Event::Done(Box::new(v.clone())), now).unwrap();
    let e = log::read(&lp).unwrap_err().to_string();
    assert!(
        e.contains("p.log.csv, line 3, field 'data': airmass: visit")
            && e.contains("0.5 is not an airmass within 1..100"),
        "{e}"
    );
    // And the seeing noted with the mark (a plan file's bound since the
    // mark's own; it used to be applied and saved as it was).
    std::fs::write(&lp, &first_rows).unwrap();
    v.airmass = p.visits[0].airmass;
    v.seeing_arcsec = Some(500.0);
    log::append(&lp, &p, Event::Done(Box::new(v.clone())), now).unwrap();
    let e = log::read(&lp).unwrap_err().to_string();
    assert!(
        e.contains("p.log.csv, line 3, field 'data': seeing_arcsec: visit")
            && e.contains("500 arcsec is not within (0, 30] arcsec"),
        "{e}"
    );
    refused(d, &["plan", "--load", "p.json"]);
    assert_eq!(std::fs::read(&path).unwrap(), before);
}

/// The other rows of an observing log are held to the plan file's bounds
/// too: a lost night outside the plan's nights, a re-plan's hours a night
/// out of (0, 24], the plan the log starts with out of its own bounds. Each
/// is named by the log's line and field when the log is read, and the plan
/// keeps its bytes (a catch-up used to apply the first two and save a plan
/// its next load refused). docs/bad-input.md V15.
#[test]
fn log_rows_out_of_a_plans_bounds_are_named_and_never_saved() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let path = d.join("p.json");
    let lp = log::log_path(&path);
    let before = std::fs::read(&path).unwrap();
    let first_rows = std::fs::read_to_string(&lp).unwrap();
    let now = rung::astro::time::parse_instant(NOW).unwrap();
    let night: chrono::NaiveDate = "2030-12-03".parse().unwrap();
    log::append(&lp, &p, Event::LostNight(night), now).unwrap();
    let err = refused(d, &["plan", "--load", "p.json"]);
    assert!(
        err.contains(
                "p.log.csv, line 3, field 'night': 2030-12-03 is outside the plan's nights, 2026-12-01 to 2026-12-03"
            ),
        "{err}"
    );
    assert_eq!(std::fs::read(&path).unwrap(), before);
    // A re-plan's hours a night.
    std::fs::write(&lp, &first_rows).unwrap();
    let replan = Event::Replan {
        at: now,
        hours_per_night: -1.0,
    };
    log::append(&lp, &p, replan, now).unwrap();
    let e = log::read(&lp).unwrap_err().to_string();
    assert!(
        e.contains(
            "p.log.csv, line 3, field 'data': hours_per_night: -1 is not within (0, 24] hours"
        ),
        "{e}"
    );
    // The plan the log starts with (what a rebuild starts from).
    let other = d.join("q.log.csv");
    let mut head = p.clone();
    head.visits.clear();
    head.hours_per_night = 30.0;
    log::append(&other, &head, Event::Plan(Box::new(head.clone())), now).unwrap();
    let e = log::read(&other).unwrap_err().to_string();
    assert!(
        e.contains(
            "q.log.csv, line 2, field 'data': hours_per_night: 30 is not within (0, 24] hours"
        ),
        "{e}"
    );
    assert_eq!(std::fs::read(&path).unwrap(), before);
}

/// `rung plan --lost-night` on a plan being made holds the night to the
/// plan's nights as a saved plan's mark does: the plan used to be saved
/// with it and refused by its next load. docs/bad-input.md V16.
#[test]
fn a_lost_night_outside_a_new_plan_is_refused_and_nothing_saved() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let err = refused(
        d,
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
            "--lost-night",
            "2030-01-01",
            "--save",
            "p.json",
        ],
    );
    assert!(
        err.contains(
                "--lost-night: invalid night: 2030-01-01 is outside the plan's nights, 2026-12-01 to 2026-12-03"
            ),
        "{err}"
    );
    assert!(!d.join("p.json").exists());
}

/// Every export of a saved plan carries what the observer needs at the
/// telescope for each visit of the night: its id (what --done takes),
/// RA/Dec, the band(s), the number of frames and the exposure; `rung next`
/// names the planned visit's id too.
#[test]
fn exports_carry_id_place_band_frames_and_exposure() {
    let d = tempfile::tempdir().unwrap();
    let p = make_plan(d.path());
    let night: chrono::NaiveDate = "2026-12-01".parse().unwrap();
    let tonight: Vec<_> = p.visits.iter().filter(|v| v.night == night).collect();
    assert!(!tonight.is_empty());
    let (csv, _) = rung(d.path(), &["plan", "--load", "p.json", "--csv"]);
    let (sheet, _) = rung(
        d.path(),
        &["plan", "--load", "p.json", "--sheet", "2026-12-01"],
    );
    rung(d.path(), &["plan", "--load", "p.json", "--ics", "p.ics"]);
    let ics = std::fs::read_to_string(d.path().join("p.ics")).unwrap();
    // The calendar read back by an independent parser (the `ical` crate),
    // its folded lines unfolded.
    let cal = ical::IcalParser::new(std::io::BufReader::new(ics.as_bytes()))
        .next()
        .unwrap()
        .unwrap();
    let mut rows = csv::Reader::from_reader(csv.as_bytes());
    let head = rows.headers().unwrap().clone();
    let col = |name: &str| head.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = rows.records().map(|r| r.unwrap()).collect();
    for v in &tonight {
        let ra = v.ra_deg.expect("RA of a planned visit");
        let dec = v.dec_deg.expect("Dec of a planned visit");
        assert!(!v.exposures.is_empty(), "{}: no bands recorded", v.id);
        // CSV: one row per visit with every field.
        let r = rows
            .iter()
            .find(|r| &r[col("id")] == v.id.as_str())
            .unwrap();
        assert!((r[col("ra_deg")].parse::<f64>().unwrap() - ra).abs() < 1e-6);
        assert!((r[col("dec_deg")].parse::<f64>().unwrap() - dec).abs() < 1e-6);
        assert_eq!(r[col("n_exposures")].parse::<u32>().unwrap(), v.n_exposures);
        assert!(r[col("exptime_s")].parse::<f64>().unwrap() > 0.0);
        for b in &v.exposures {
            assert!(
                r[col("bands")].split(' ').any(|x| x == b.band),
                "{}",
                &r[col("bands")]
            );
            let want = format!("{} {} × ", b.band, b.n_exposures);
            assert!(
                r[col("exposures")].contains(&want),
                "{}: {}",
                v.id,
                &r[col("exposures")]
            );
        }
        // Night sheet: the visit's row holds its id, place, bands and frames.
        let line = sheet
            .lines()
            .find(|l| l.contains(&format!("| {} |", v.id)))
            .unwrap_or_else(|| panic!("{} not on the sheet:\n{sheet}", v.id));
        assert!(line.contains(&rung::plan::export::ra_hms(ra)), "{line}");
        assert!(line.contains(&rung::plan::export::dec_dms(dec)), "{line}");
        for b in &v.exposures {
            assert!(
                line.contains(&format!("{} {} × ", b.band, b.n_exposures)),
                "{line}"
            );
        }
        // Calendar: the event of the visit names all of it.
        let uid = format!("{}@rung", v.id.replace(' ', "_"));
        let ev = cal
            .events
            .iter()
            .find(|e| {
                e.properties
                    .iter()
                    .any(|p| p.name == "UID" && p.value.as_deref() == Some(uid.as_str()))
            })
            .unwrap_or_else(|| panic!("{} has no event", v.id));
        let desc = ev
            .properties
            .iter()
            .find(|p| p.name == "DESCRIPTION")
            .and_then(|p| p.value.clone())
            .unwrap()
            .replace("\\,", ",")
            .replace("\\;", ";");
        assert!(desc.contains(&v.id), "{desc}");
        assert!(desc.contains(&rung::plan::export::ra_hms(ra)), "{desc}");
        assert!(desc.contains(&rung::plan::export::dec_dms(dec)), "{desc}");
        for b in &v.exposures {
            assert!(
                desc.contains(&format!("{} {} × ", b.band, b.n_exposures)),
                "{desc}"
            );
        }
    }
    // The plan's own table and `rung next` print the ids --done takes.
    let (table, _) = rung(d.path(), &["plan", "--load", "p.json"]);
    let (next, _) = rung(d.path(), &["next", "--plan", "p.json"]);
    for v in &tonight {
        assert!(table.contains(&v.id), "{} not in the plan table", v.id);
    }
    assert!(
        tonight.iter().any(|v| next.contains(&v.id)),
        "rung next names no planned visit id:\n{next}"
    );
}

/// A visit marked done an hour before its planned start is shown at the
/// observed start, marked done, by the plan table, `rung plan --json`
/// (span_start), `rung next` text (the ✓ and the reason) and `rung next
/// --json` (done_visit_id, done_start): one time on every surface, in UTC
/// and in the demo site's own zone.
#[test]
fn a_visit_marked_done_early_shows_its_observed_time_on_every_surface() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    // A visit of tonight (2026-12-01) planned to start after 01:10 UTC.
    let v = p
        .visits
        .iter()
        .find(|v| {
            v.status == Status::Planned
                && v.night.to_string() == "2026-12-01"
                && v.start.iso().as_str() > "2026-12-02T01:10:00Z"
        })
        .expect("a visit of the first night after 01:10 UTC")
        .clone();
    let observed = v.start.add_seconds(-3600.0);
    let iso = observed.round_to_second().iso();
    mark_done(d, &v.id, &iso);
    let utc = rung::output::clock_hm(observed, &chrono_tz::UTC);
    let tz = rung::io::sites::resolve("pampa-lucero").unwrap().timezone;
    let local = rung::output::clock_hm(observed, &tz);
    let planned = rung::output::clock_hm(v.start, &chrono_tz::UTC);
    assert_ne!(utc, planned);
    // The plan table: the visit's line at the observed time, done.
    let (table, _) = rung(d, &["plan", "--load", "p.json"]);
    let line = table
        .lines()
        .find(|l| l.contains(&format!(" {} ", v.id)))
        .unwrap_or_else(|| panic!("{} not in\n{table}", v.id));
    assert!(
        line.contains(&format!("{utc} UTC / {local} local")) && line.contains("done"),
        "{line}"
    );
    // rung plan --json: span_start is the observed start, start the planned one.
    let jv = json_visit(d, &v.id);
    assert_eq!(jv["status"], "done");
    assert_eq!(
        rung::astro::time::parse_instant(jv["span_start"].as_str().unwrap())
            .unwrap()
            .round_to_second()
            .iso(),
        iso
    );
    assert_eq!(
        jv["start"].as_str().unwrap()[..16],
        v.start.iso()[..16],
        "the planned start is kept"
    );
    // rung next, text and JSON, at 23:30 UTC (RUNG_NOW) of that night.
    let words = format!("visit {} done at {utc} UTC ({local} local)", v.id);
    let (next, _) = rung(d, &["next", "--plan", "p.json"]);
    assert!(next.contains(&words), "{words:?} not in\n{next}");
    let (nj, _) = rung(d, &["next", "--plan", "p.json", "--json"]);
    let nj: serde_json::Value = serde_json::from_str(&nj).unwrap();
    let row = nj["rows"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["target"] == v.target.as_str())
        .unwrap();
    assert_eq!(row["done_visit_id"], v.id.as_str());
    assert_eq!(
        rung::astro::time::parse_instant(row["done_start"].as_str().unwrap())
            .unwrap()
            .round_to_second()
            .iso(),
        iso
    );
    assert!(
        row["reasons"]
            .as_array()
            .unwrap()
            .iter()
            .any(|r| r == words.as_str()),
        "{row}"
    );
}

/// The airmass a plan shows for a visit, from `rung plan --json`.
fn json_visit(dir: &Path, id: &str) -> serde_json::Value {
    let (json, _) = rung(dir, &["plan", "--load", "p.json", "--json"]);
    let j: serde_json::Value = serde_json::from_str(&json).unwrap();
    j["plan"]["visits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["id"] == id)
        .unwrap()
        .clone()
}

/// `rung plan --load p.json --done ID --observed AT` in `dir`; its stderr.
fn mark_done(dir: &Path, id: &str, at: &str) -> String {
    rung(
        dir,
        &["plan", "--load", "p.json", "--done", id, "--observed", at],
    )
    .1
}

/// `rung where --target TARGET --at AT --json` on the demo programme.
fn where_json(dir: &Path, target: &str, at: &str) -> serde_json::Value {
    let (w, _) = rung(
        dir,
        &[
            "where",
            "--targets",
            DEMO,
            "--target",
            target,
            "--at",
            at,
            "--json",
        ],
    );
    serde_json::from_str(&w).unwrap()
}

/// A JSON array of strings.
fn strings(v: &serde_json::Value) -> Vec<&str> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap())
        .collect()
}

/// A visit marked done 80 minutes after its planned start shows the airmass
/// of the middle of the visit as observed, beside the time the views show
/// (not the planned time's), the same as `rung where` at that instant (to
/// 1e-9: the plan works through the night's interpolated frame, `rung
/// where` through SOFA apco13 at the instant; the frame's bound, 0.01″ in
/// the CIP, is in src/astro/frames.rs and DEVELOPERS.md); and the plan
/// table lists the night's visits in the order of the times it shows.
#[test]
fn a_visit_marked_done_later_shows_the_airmass_of_its_observed_time() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    // A visit of the first night whose target is still well up 80 minutes
    // after its planned start, at an airmass that differs by more than the
    // two decimals the table shows.
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let airmass_at = |v: &rung::plan::schedule::Visit, t: rung::astro::time::Instant| {
        let place =
            rung::astro::frames::CatalogPlace::fixed_deg(v.ra_deg.unwrap(), v.dec_deg.unwrap());
        let ctx = rung::astro::frames::Context::exact(&site, t).unwrap();
        rung::astro::pointing(&site, &ctx, &place).airmass
    };
    let shift_s = 4800.0;
    let v = p
        .visits
        .iter()
        .find(|v| {
            let mid = v.mid().add_seconds(shift_s);
            v.status == Status::Planned
                && v.night.to_string() == "2026-12-01"
                && airmass_at(v, mid).is_some_and(|x| x < 2.5 && (x - v.airmass).abs() > 0.02)
        })
        .expect("a visit of the first night still up 80 minutes later")
        .clone();
    let observed = v.start.add_seconds(shift_s);
    let iso = observed.iso();
    let err = mark_done(d, &v.id, &iso);
    assert!(!err.contains("check the observed time"), "{err}");
    let jv = json_visit(d, &v.id);
    let got = jv["airmass"].as_f64().unwrap();
    let mid = v.mid().add_seconds(shift_s);
    // rung where at the observed middle (the command, as an observer runs it).
    // To the microsecond: the middle of an odd number of seconds
    // falls on a half second.
    let w = where_json(
        d,
        &v.target,
        &mid.to_datetime()
            .format("%Y-%m-%dT%H:%M:%S%.6fZ")
            .to_string(),
    );
    let want = w["airmass"].as_f64().unwrap();
    assert!(
        (got - want).abs() < 1e-9 * want,
        "{}: airmass {got} in the plan, {want} from rung where at {}",
        v.id,
        mid.iso()
    );
    assert!(
        (got - v.airmass).abs() > 0.02,
        "{}: still the planned airmass {}",
        v.id,
        v.airmass
    );
    // The table: its line shows that airmass; the night's lines in time order.
    let (table, _) = rung(d, &["plan", "--load", "p.json"]);
    let line = table
        .lines()
        .find(|l| l.contains(&format!(" {} ", v.id)))
        .unwrap();
    assert!(line.contains(&format!("X={got:.2}")), "{line}");
    let night: Vec<&str> = table
        .lines()
        .skip_while(|l| !l.contains("night 2026-12-01"))
        .skip(1)
        .take_while(|l| !l.contains("night "))
        .collect();
    let times: Vec<&str> = night.iter().map(|l| &l.trim_start()[..5]).collect();
    let mut sorted = times.clone();
    sorted.sort();
    // The first night starts in the evening UTC of 2026-12-01 (00:xx UTC of
    // the 2nd for this site, UTC−3 in config/sites.toml), so clock order is
    // time order within it.
    assert_eq!(
        times, sorted,
        "the night's lines out of time order:\n{table}"
    );
}

/// A visit marked done at an instant when its target is below the horizon,
/// or with the Sun up, keeps a sensible airmass and the observer is told to
/// check the time: the plan stays loadable (its airmasses within 1..100).
#[test]
fn a_visit_marked_done_at_an_unlikely_time_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    // Twelve hours after a planned middle: daytime at the site, and a target
    // that is not circumpolar is below the horizon.
    let shift_s = 12.0 * 3600.0;
    let v = p
        .visits
        .iter()
        .filter(|v| v.status == Status::Planned)
        .find_map(|v| {
            let place =
                rung::astro::frames::CatalogPlace::fixed_deg(v.ra_deg.unwrap(), v.dec_deg.unwrap());
            let ctx =
                rung::astro::frames::Context::exact(&site, v.mid().add_seconds(shift_s)).unwrap();
            let pt = rung::astro::pointing(&site, &ctx, &place);
            (pt.altitude_deg < -5.0 && pt.sun_altitude_deg > 5.0).then(|| v.clone())
        })
        .expect("a visit whose target is down twelve hours later, in daylight");
    let observed = v.start.add_seconds(shift_s).round_to_second();
    // The target and the Sun at the middle of the visit as observed (SOFA
    // apco13 at that instant; rung works through the night's frame, the
    // same to the 0.1° shown).
    let mid = observed.add_seconds(v.end.seconds_since(&v.start) / 2.0);
    let place = rung::astro::frames::CatalogPlace::fixed_deg(v.ra_deg.unwrap(), v.dec_deg.unwrap());
    let pt = rung::astro::pointing(
        &site,
        &rung::astro::frames::Context::exact(&site, mid).unwrap(),
        &place,
    );
    let err = mark_done(d, &v.id, &observed.iso());
    let want = format!(
        "rung: note: at the middle of {} as observed ({}) '{}' is below the horizon (altitude {:.1}°), so its airmass stays the planned {:.2} and the Sun is up (altitude {:.1}°): check the observed time",
        v.id,
        mid.round_to_second().iso(),
        v.target,
        pt.altitude_deg,
        v.airmass,
        pt.sun_altitude_deg
    );
    assert!(err.lines().any(|l| l == want), "{want:?} not in\n{err}");
    let jv = json_visit(d, &v.id);
    assert_eq!(jv["status"], "done");
    assert_eq!(jv["airmass"].as_f64().unwrap(), v.airmass);
}

/// An observed time whose night lies outside the plan's nights (a year
/// typed wrong) is refused, naming the night and the plan's nights, with
/// the plan file and its log left as they were; the same visit then marks
/// done at a time within them (docs/bad-input.md V14).
#[test]
fn a_visit_observed_outside_the_plans_nights_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let v = &p.visits[0];
    let path = d.join("p.json");
    let lp = rung::plan::log::log_path(&path);
    let (plan_before, log_before) = (std::fs::read(&path).unwrap(), std::fs::read(&lp).unwrap());
    let year_off = v.start.add_seconds(365.0 * 86_400.0).round_to_second();
    let err = refused(
        d,
        &[
            "plan",
            "--load",
            "p.json",
            "--done",
            &v.id,
            "--observed",
            &year_off.iso(),
        ],
    );
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let mut marked = v.clone();
    marked.status = Status::Done;
    marked.observed = Some(year_off);
    let want = format!(
        "--done: invalid observed: {} as observed ({}): its night {} is outside the plan's nights, 2026-12-01 to 2026-12-03: check the observed time",
        v.id,
        year_off.iso(),
        marked.held_night(&site)
    );
    assert!(err.contains(&want), "{want}\n{err}");
    assert_eq!(std::fs::read(&path).unwrap(), plan_before);
    assert_eq!(std::fs::read(&lp).unwrap(), log_before);
    // Within the plan's nights, the same mark is taken.
    mark_done(d, &v.id, &v.start.round_to_second().iso());
    assert_eq!(json_visit(d, &v.id)["status"], "done");
}

/// A visit marked done when its target stood near the Sun in daylight gets
/// the Sun caution of that time in every view (as the scheduler gives a
/// placed visit's, at its start, middle or end), the caution `rung where`
/// gives at that instant; the same visit marked done in the dark has none.
#[test]
fn a_visit_marked_done_near_the_sun_carries_the_sun_caution() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // A year's plan: a mark is held within the plan's nights.
    let p = make_plan_to(d, "2027-11-30");
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let v = p
        .visits
        .iter()
        .find(|v| v.status == Status::Planned && v.cautions.is_empty())
        .unwrap()
        .clone();
    let place = rung::astro::frames::CatalogPlace::fixed_deg(v.ra_deg.unwrap(), v.dec_deg.unwrap());
    // The first local noon (15:00 UTC here) of the plan's year when the
    // target is up, less than 30° from the Sun, with the Sun up.
    let noon = |k: f64| v.start.add_seconds(k * 86_400.0 - 3600.0 * 12.0);
    let k = (1..360)
        .map(|k| k as f64)
        .find(|k| {
            let ctx = rung::astro::frames::Context::exact(&site, noon(*k)).unwrap();
            let pt = rung::astro::pointing(&site, &ctx, &place);
            pt.altitude_deg > 10.0 && pt.sun_separation_deg < 30.0 && pt.sun_altitude_deg > 10.0
        })
        .expect("a day of the year the target stands near the Sun");
    let observed = noon(k).round_to_second();
    mark_done(d, &v.id, &observed.iso());
    let jv = json_visit(d, &v.id);
    let cautions = strings(&jv["cautions"]);
    // rung where at the observed start names the same caution (the site's
    // limit, 45° by default, config/sites.toml).
    let w = where_json(d, &v.target, &observed.iso());
    let want = strings(&w["cautions"]);
    assert!(
        !want.is_empty() && want[0].starts_with("SUN CAUTION"),
        "{w}"
    );
    assert_eq!(cautions.len(), 1, "{jv}");
    assert!(cautions[0].starts_with("SUN CAUTION"), "{jv}");
    // The separation printed to 0.1°: the same unless it is a hair from a
    // rounding edge between the start and the exact instant.
    assert_eq!(cautions[0], want[0]);
    // Marked again at its planned start: in the dark, no caution.
    mark_done(d, &v.id, &v.start.iso());
    let jv = json_visit(d, &v.id);
    assert_eq!(jv["cautions"].as_array().unwrap().len(), 0, "{jv}");
}

/// A visit of the second night observed on the first (marked done with
/// that time) is shown on the first night, where a re-plan holds its time
/// (Visit::held_night): in the plan table under the first night's heading,
/// in the first night's sheet and not in the second's.
#[test]
fn a_visit_observed_on_another_night_is_shown_on_that_night() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let first = |n: &str| {
        p.visits
            .iter()
            .filter(|v| v.status == Status::Planned && v.night.to_string() == n)
            .min_by(|a, b| a.start.partial_cmp(&b.start).unwrap())
            .unwrap()
            .clone()
    };
    let (w, v) = (first("2026-12-01"), first("2026-12-02"));
    // Observed an hour after the first night's first visit starts.
    let observed = w.start.add_seconds(3600.0).round_to_second();
    mark_done(d, &v.id, &observed.iso());
    let (table, _) = rung(d, &["plan", "--load", "p.json"]);
    let night_of_line = |id: &str| -> String {
        let mut night = String::new();
        for l in table.lines() {
            if let Some(rest) = l.trim_start().strip_prefix("night ") {
                night = rest[..10].to_string();
            }
            if l.contains(&format!(" {id} ")) {
                return night;
            }
        }
        panic!("{id} not in\n{table}")
    };
    assert_eq!(night_of_line(&v.id), "2026-12-01", "{table}");
    let jv = json_visit(d, &v.id);
    assert_eq!(
        (jv["held_night"].as_str(), jv["night"].as_str()),
        (Some("2026-12-01"), Some("2026-12-02"))
    );
    let (sheet1, _) = rung(d, &["plan", "--load", "p.json", "--sheet", "2026-12-01"]);
    let (sheet2, _) = rung(d, &["plan", "--load", "p.json", "--sheet", "2026-12-02"]);
    let cell = format!("| {} |", v.id);
    assert!(sheet1.contains(&cell), "{sheet1}");
    assert!(!sheet2.contains(&cell), "{sheet2}");
    // rung next on the first night (23:30 UTC, RUNG_NOW): done tonight.
    let (nj, _) = rung(d, &["next", "--plan", "p.json", "--json"]);
    let nj: serde_json::Value = serde_json::from_str(&nj).unwrap();
    let row = nj["rows"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["target"] == v.target.as_str())
        .unwrap();
    assert_eq!(row["done_visit_id"], v.id.as_str(), "{row}");
}

/// `--now T` is the present a re-plan and a mark are made at: the re-plan
/// is the one made with the clock at T (`RUNG_NOW=T`), its log row holds T
/// as the re-plan's clock and the real clock as the time it was written; a
/// visit marked done without --observed starts at T. Without --replan or
/// --done it has nothing to apply to and is refused, as is a date that is
/// not one, with the plan file unchanged.
#[test]
fn now_is_the_present_of_a_replan_and_a_mark() {
    let at = "2026-12-02T03:00:00Z";
    let a = tempfile::tempdir().unwrap();
    let b = tempfile::tempdir().unwrap();
    make_plan(a.path());
    make_plan(b.path());
    rung(
        a.path(),
        &["plan", "--load", "p.json", "--replan", "--now", at],
    );
    let o = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(["plan", "--load", "p.json", "--replan"])
        .current_dir(b.path())
        .env("RUNG_CONFIG_DIR", b.path())
        .env("RUNG_NOW", at)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let pa = file::load(&a.path().join("p.json")).unwrap();
    let pb = file::load(&b.path().join("p.json")).unwrap();
    assert_eq!(pa.visits, pb.visits);
    assert!(pa.visits.iter().any(|v| v.status == Status::Lost));
    let rows = log::read(&log::log_path(&a.path().join("p.json"))).unwrap();
    let last = rows.last().unwrap();
    assert_eq!(last.logged.iso(), NOW);
    match &last.event {
        Event::Replan { at: t, .. } => assert_eq!(t.iso(), at),
        e => panic!("{e:?}"),
    }
    // A mark without --observed takes --now as the visit's start.
    let id = first_planned(&pa);
    let later = "2026-12-04T04:00:00Z";
    rung(
        a.path(),
        &["plan", "--load", "p.json", "--done", &id, "--now", later],
    );
    let v = file::load(&a.path().join("p.json")).unwrap();
    assert_eq!(
        v.visit(&id).unwrap().observed.map(|t| t.iso()).as_deref(),
        Some(later)
    );
    // Refused, the plan file unchanged.
    let before = std::fs::read(a.path().join("p.json")).unwrap();
    for (args, why) in [
        (
            vec!["plan", "--load", "p.json", "--now", at],
            "--now is the present a re-plan or a mark is made at: give --replan or --done ID too",
        ),
        (
            vec![
                "plan",
                "--load",
                "p.json",
                "--replan",
                "--now",
                "2026-12-32T00:00:00Z",
            ],
            "--now: ",
        ),
    ] {
        let err = refused(a.path(), &args);
        assert!(err.contains(why), "{args:?}: {err}");
        assert_eq!(std::fs::read(a.path().join("p.json")).unwrap(), before);
    }
}

/// `rung plan --load p.json --done ID --observed T --seeing S --comment C`.
fn mark_done_noted(dir: &Path, id: &str, observed: &str, seeing: &str, comment: &str) {
    rung(
        dir,
        &[
            "plan",
            "--load",
            "p.json",
            "--done",
            id,
            "--observed",
            observed,
            "--seeing",
            seeing,
            "--comment",
            comment,
        ],
    );
}

/// The night sheet of `night` and its row of the visit `id`.
fn sheet_row(dir: &Path, night: &str, id: &str) -> (String, String) {
    let (sheet, _) = rung(dir, &["plan", "--load", "p.json", "--sheet", night]);
    let row = sheet
        .lines()
        .find(|l| l.contains(&format!("| {id} |")))
        .unwrap_or_else(|| panic!("{id} not on the sheet:\n{sheet}"))
        .to_string();
    (sheet, row)
}

/// The id of the plan's first planned visit.
fn first_planned(p: &PlanFile) -> String {
    p.visits
        .iter()
        .find(|v| v.status == Status::Planned)
        .unwrap()
        .id
        .clone()
}

/// The seeing and the comment noted with a mark are shown with the done
/// visit wherever it is listed: the night sheet (a `|` in the comment kept
/// inside its cell), the calendar (its commas escaped, RFC 5545), the plan's
/// listing and `rung next`. They used to reach only the CSV and `--json`.
#[test]
fn the_seeing_and_comment_noted_are_shown_with_the_done_visit() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let v = p
        .visits
        .iter()
        .find(|v| v.status == Status::Planned)
        .unwrap()
        .clone();
    let comment = "thin cirrus | gusts, 20 m/s";
    mark_done_noted(d, &v.id, &v.start.iso(), "0.85", comment);
    let noted = format!("done (seeing 0.85″, “{comment}”)");
    // The night sheet's status cell.
    let (sheet, row) = sheet_row(d, &v.night.to_string(), &v.id);
    assert!(
        row.contains(&format!("| {} |", noted.replace('|', "\\|"))),
        "{row}"
    );
    // Still 13 cells.
    assert_eq!(row.replace("\\|", "").matches('|').count(), 14, "{row}");
    // The calendar's description.
    rung(d, &["plan", "--load", "p.json", "--ics", "p.ics"]);
    let ics = std::fs::read_to_string(d.join("p.ics"))
        .unwrap()
        .replace("\r\n ", "");
    // The status with its notes ends the sentence: no second parenthesis
    // beside it (it read "done (seeing …) (UTC … to …)").
    assert!(
        ics.contains(&format!("{}.", noted.replace(',', "\\,"))),
        "{ics}"
    );
    assert!(!ics.contains(") ("), "{ics}");
    // The plan's listing.
    let (listing, _) = rung(d, &["plan", "--load", "p.json"]);
    let line = listing.lines().find(|l| l.contains(&v.id)).unwrap();
    assert!(line.contains(&noted), "{line}");
    // rung next, just after the visit.
    let (next, _) = rung(
        d,
        &[
            "next",
            "--plan",
            "p.json",
            "--at",
            &v.end.add_seconds(60.0).iso(),
        ],
    );
    assert!(
        next.contains(&format!("seeing 0.85″, “{comment}”")),
        "{next}"
    );
    // A planned visit says "planned" alone.
    let other = p
        .visits
        .iter()
        .find(|x| x.status == Status::Planned && x.id != v.id && x.night == v.night)
        .unwrap();
    let row = sheet
        .lines()
        .find(|l| l.contains(&format!("| {} |", other.id)))
        .unwrap();
    assert!(row.contains("| planned |"), "{row}");
}

/// A visit marked done and then lost (its data found unusable) is shown
/// where it was observed, the attempt's record: the sheet's row at the
/// observed start, beside the airmass of that time (which the done mark
/// gave), with the seeing and comment noted. It used to be shown at its
/// planned start beside the observed time's airmass.
#[test]
fn a_done_visit_marked_lost_is_shown_where_it_was_observed() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let v = p
        .visits
        .iter()
        .find(|v| v.status == Status::Planned)
        .unwrap()
        .clone();
    let observed = v.start.add_seconds(2400.0);
    mark_done_noted(d, &v.id, &observed.iso(), "3.5", "cloud");
    let done = file::load(&d.join("p.json")).unwrap();
    let dv = done.visits.iter().find(|x| x.id == v.id).unwrap().clone();
    assert_ne!(
        dv.airmass, v.airmass,
        "the planned and observed airmass differ"
    );
    rung(d, &["plan", "--load", "p.json", "--lost", &v.id]);
    let lost = file::load(&d.join("p.json")).unwrap();
    let lv = lost.visits.iter().find(|x| x.id == v.id).unwrap();
    assert_eq!(lv.status, Status::Lost);
    assert_eq!(lv.observed, Some(observed));
    assert_eq!(lv.airmass, dv.airmass);
    assert_eq!(lv.span().0, observed);
    let site = rung::io::sites::resolve(&lost.site).unwrap();
    let night = lv.held_night(&site);
    let (_, row) = sheet_row(d, &night.to_string(), &v.id);
    let hms = |t: rung::astro::time::Instant| {
        t.round_to_second()
            .to_datetime()
            .format("%H:%M:%S")
            .to_string()
    };
    assert!(row.starts_with(&format!("| {} |", hms(observed))), "{row}");
    assert!(
        row.contains(&format!(
            "| {:.2} | lost (seeing 3.5″, “cloud”) |",
            dv.airmass
        )),
        "{row}"
    );
}

/// A rebuild whose log marks a visit the plan made again does not hold (a
/// log written by hand, or the targets file or rung's scheduler changed
/// since) keeps the logged visit and says so, naming the log's line: it used
/// to add it beside the plan's own visit of that time without a word. A
/// rebuild whose marks all match says nothing.
#[test]
fn a_rebuild_names_a_logged_visit_the_plan_does_not_hold() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let path = d.join("p.json");
    let now = rung::astro::time::parse_instant(NOW).unwrap();
    let mut v = p.visits[0].clone();
    v.status = Status::Done;
    v.id = format!("{}#99", v.target);
    log::append(
        &log::log_path(&path),
        &p,
        Event::Done(Box::new(v.clone())),
        now,
    )
    .unwrap();
    let (_, err) = rung(d, &["plan", "--rebuild", "p.log.csv", "--save", "q.json"]);
    let want = format!(
        "rung: warning: p.log.csv, line 3: visit {} (done) is not in the plan made again from the log's settings (the targets file or rung's scheduler changed since it was logged): kept as logged, beside the plan's own visits of {}; a --replan places the rest around it",
        v.id, v.target
    );
    assert!(err.contains(&want), "{err}");
    let q = file::load(&d.join("q.json")).unwrap();
    assert!(
        q.visits
            .iter()
            .any(|x| x.id == v.id && x.status == Status::Done)
    );
    // The marks of the plan's own visits say nothing.
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    rung(d, &["plan", "--load", "p.json", "--done", &p.visits[0].id]);
    let (_, err) = rung(d, &["plan", "--rebuild", "p.log.csv", "--save", "q.json"]);
    assert!(!err.contains("warning"), "{err}");
}
