//! A signal-to-noise measured on a done visit (`rung plan --done ID --snr
//! S`, the UI's `snr=` word): the methods' outcomes take it in place of the
//! expected one, band by band; it is kept in the plan, its log and every
//! export; bad values are refused with the plan file unchanged.
//!
//! The checks are of the project's own arithmetic (no outside value): a
//! measured value equal to the expected one gives the outcome of a visit
//! marked without it to the bit, and a lower one a larger σd/d, for each
//! method of the demo programme.

use rung::plan::file::{self, PlanFile};
use rung::plan::schedule::Status;
use std::path::Path;

mod plan_cli;
use plan_cli::DEMO;
const NOW: &str = "2026-12-02T12:00:00Z";

/// `rung ARGS` in `dir`, which must succeed: its stdout.
fn ok(dir: &Path, args: &[&str]) -> String {
    let (ok, out, err) = plan_cli::run(dir, NOW, args);
    assert!(ok, "{args:?}: {err}");
    out
}

/// `rung ARGS` in `dir`, which must fail: its stderr.
fn refused(dir: &Path, args: &[&str]) -> String {
    let (ok, _, err) = plan_cli::run(dir, NOW, args);
    assert!(!ok, "{args:?} was accepted");
    err
}

/// A three-night plan of the demo programme saved as `dir/p.json`, its
/// methods planning to 2027-12-31 (so that every kind has a visit in it).
fn make_plan(dir: &Path) -> PlanFile {
    plan_cli::make_plan(dir, NOW, "2026-12-03", "2027-12-31")
}

/// The first planned visit of `kind`.
fn first_of(p: &PlanFile, kind: &str) -> rung::plan::schedule::Visit {
    p.visits
        .iter()
        .find(|v| v.status == Status::Planned && v.kind.as_str() == kind)
        .unwrap_or_else(|| panic!("no {kind} visit in the demo plan"))
        .clone()
}

/// `rung plan --load p.json --done ID --observed START [--snr SNR]` in `dir`.
fn mark(dir: &Path, id: &str, start: &str, snr: Option<&str>) {
    let mut args = vec![
        "plan",
        "--load",
        "p.json",
        "--done",
        id,
        "--observed",
        start,
    ];
    if let Some(s) = snr {
        args.extend(["--snr", s]);
    }
    ok(dir, &args);
}

/// A copy of `p.json` in its own folder with `id` marked done at its planned
/// start (with `--snr SNR` when given), then re-planned: the target's
/// outcome (`rung plan --json`) and the visit as saved.
fn done_and_replan(
    src: &Path,
    id: &str,
    start: &str,
    snr: Option<&str>,
) -> (serde_json::Value, serde_json::Value) {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::copy(src.join("p.json"), d.join("p.json")).unwrap();
    std::fs::copy(src.join("p.log.csv"), d.join("p.log.csv")).unwrap();
    mark(d, id, start, snr);
    let j: serde_json::Value =
        serde_json::from_str(&ok(d, &["plan", "--load", "p.json", "--replan", "--json"])).unwrap();
    let target = id.split('#').next().unwrap();
    let outcome = j["outcomes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|o| o["target"] == target)
        .unwrap()
        .clone();
    let visit = j["plan"]["visits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|v| v["id"] == id)
        .unwrap()
        .clone();
    (outcome, visit)
}

fn pct(o: &serde_json::Value) -> f64 {
    // The prediction's own (the outcome's shown value is null above 100 %).
    o["prediction"]["distance_precision_pct"]
        .as_f64()
        .unwrap_or_else(|| panic!("no σd/d in {o}"))
}

/// For a parallax star, a pulsator and a supernova: marked done with the
/// signal-to-noise it was expected to reach, the outcome is that of a visit
/// marked without one, to the bit; with a quarter of it (clouds), σd/d is
/// larger. For the supernova, a value given for one band changes that
/// band's point only, and the same holds.
#[test]
fn a_measured_snr_is_what_the_outcome_takes() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    for kind in ["parallax", "pulsator", "transient"] {
        let v = first_of(&p, kind);
        let start = v.start.iso();
        let (plain, _) = done_and_replan(d, &v.id, &start, None);
        // The expected value as the plan file writes it (shortest round trip).
        let (band, expected) = match v.exposures.first() {
            Some(b) if kind == "transient" => (format!("{}=", b.band), b.snr),
            _ => (String::new(), v.snr),
        };
        let same = format!("{band}{expected}");
        let (o_same, v_same) = done_and_replan(d, &v.id, &start, Some(&same));
        assert_eq!(
            pct(&o_same).to_bits(),
            pct(&plain).to_bits(),
            "{kind} {}: {} against {}",
            v.id,
            pct(&o_same),
            pct(&plain)
        );
        let key = v.exposures.first().map(|b| b.band.clone()).unwrap();
        assert_eq!(v_same["snr_measured"][&key].as_f64(), Some(expected));
        // The expected value itself is kept beside the measured one.
        assert_eq!(v_same["snr"].as_f64(), Some(v.snr));
        let low = format!("{band}{}", expected / 4.0);
        let (o_low, v_low) = done_and_replan(d, &v.id, &start, Some(&low));
        assert!(
            pct(&o_low) > pct(&plain),
            "{kind} {}: σd/d {} with a quarter of the expected S/N, {} without",
            v.id,
            pct(&o_low),
            pct(&plain)
        );
        assert_eq!(v_low["snr_measured"][&key].as_f64(), Some(expected / 4.0));
        // The outcome says which done visits weigh a measured value.
        let said = |o: &serde_json::Value| {
            o["notes"].as_array().unwrap().iter().any(|n| {
                n.as_str().unwrap().starts_with(&format!(
                    "with the signal-to-noise measured on {} S/N ",
                    v.id
                ))
            })
        };
        assert!(said(&o_low) && said(&o_same) && !said(&plain), "{o_low}");
    }
}

/// The measured value goes to the observing log with the visit, so a plan
/// rebuilt from the log alone holds it; the CSV, the night sheet, the
/// calendar and `rung next` show it beside the expected one.
#[test]
fn a_measured_snr_is_kept_in_the_log_and_shown_in_every_export() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let v = first_of(&p, "transient");
    let bands: Vec<&str> = v.exposures.iter().map(|b| b.band.as_str()).collect();
    assert!(bands.len() >= 2, "{bands:?}");
    let given = format!("{}=12.4,{}=40", bands[0], bands[1]);
    let start = v.start.iso();
    mark(d, &v.id, &start, Some(&given));
    let saved = file::load(&d.join("p.json")).unwrap();
    let sv = saved.visits.iter().find(|x| x.id == v.id).unwrap();
    assert_eq!(sv.snr_measured.get(bands[0]), Some(&12.4));
    assert_eq!(sv.snr_measured.get(bands[1]), Some(&40.0));
    assert_eq!(sv.snr_measured.len(), 2);
    // The methods take the measured value of each band given, the expected
    // one of the others.
    let e = sv.epoch();
    assert_eq!(e.snr, 12.4);
    assert_eq!(e.exposures[0].snr, 12.4);
    assert_eq!(e.exposures[1].snr, 40.0);
    for (k, b) in e.exposures.iter().enumerate().skip(2) {
        assert_eq!(b.snr, v.exposures[k].snr, "{}", b.band);
    }
    // Only while the visit is done (a visit marked lost afterwards, or a
    // hand-edited planned one, is as expected).
    let mut lost = sv.clone();
    lost.status = Status::Lost;
    assert_eq!(lost.epoch(), sv.expected_epoch());
    assert_ne!(sv.epoch(), sv.expected_epoch());

    // Rebuilt from the log alone.
    ok(
        d,
        &[
            "plan",
            "--rebuild",
            "p.log.csv",
            "--targets",
            DEMO,
            "--save",
            "r.json",
        ],
    );
    let rebuilt = file::load(&d.join("r.json")).unwrap();
    let rv = rebuilt.visits.iter().find(|x| x.id == v.id).unwrap();
    assert_eq!(rv.snr_measured, sv.snr_measured);

    // CSV: its own column, band=value pairs.
    let csv = ok(d, &["plan", "--load", "p.json", "--csv"]);
    let mut lines = csv.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = head.iter().position(|h| *h == "snr_measured").unwrap();
    let row = lines
        .find(|l| l.starts_with(&format!("{},", v.id)))
        .unwrap();
    assert!(
        row.ends_with(&format!("{}=12.4;{}=40.0", bands[0], bands[1])),
        "{row}"
    );
    assert_eq!(col, head.len() - 1);

    // The night sheet and the calendar: measured beside expected.
    let sheet = ok(
        d,
        &["plan", "--load", "p.json", "--sheet", &v.night.to_string()],
    );
    let want = format!(
        "{} 12, {} 40 measured ({} {:.0}, {} {:.0} expected)",
        bands[0], bands[1], bands[0], v.exposures[0].snr, bands[1], v.exposures[1].snr
    );
    assert!(sheet.contains(&want), "{want}\n{sheet}");
    ok(d, &["plan", "--load", "p.json", "--ics", "p.ics"]);
    let ics = std::fs::read_to_string(d.join("p.ics"))
        .unwrap()
        .replace("\r\n ", "");
    assert!(ics.contains(&want.replace(',', "\\,")), "{ics}");

    // rung next names it with the done visit.
    let next = ok(
        d,
        &[
            "next",
            "--plan",
            "p.json",
            "--at",
            &v.end.add_seconds(60.0).iso(),
        ],
    );
    let said = format!("S/N {} 12, {} 40 measured", bands[0], bands[1]);
    assert!(next.contains(&said), "{said}\n{next}");

    // Marked done again without --snr: the new mark replaces the old one
    // whole (README: "Marking a visit done again replaces everything").
    mark(d, &v.id, &start, None);
    let again = file::load(&d.join("p.json")).unwrap();
    let av = again.visits.iter().find(|x| x.id == v.id).unwrap();
    assert!(av.snr_measured.is_empty() && av.seeing_arcsec.is_none());
}

/// Bad measured values are refused with the reason, and the plan file stays
/// byte for byte as it was (docs/bad-input.md, V8 and V9).
#[test]
fn a_bad_measured_snr_is_refused_and_the_plan_is_unchanged() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let v = first_of(&p, "pulsator");
    let before = std::fs::read(d.join("p.json")).unwrap();
    let band = v.exposures[0].band.clone();
    for (snr, why) in [
        ("0", "0 is not within (0, 10000]"),
        ("-3", "-3 is not within (0, 10000]"),
        ("20000", "20000 is not within (0, 10000]"),
        ("NaN", "is not within (0, 10000]"),
        ("abc", "'abc' is not a signal-to-noise"),
        ("V=", "'V=' is not a signal-to-noise"),
        (
            "X=40",
            &format!("{}: it exposes in {band}, not in 'X'", v.id) as &str,
        ),
        (
            &format!("{band}=40,{band}=50") as &str,
            &format!("band '{band}' is given twice") as &str,
        ),
    ] {
        let err = refused(
            d,
            &["plan", "--load", "p.json", "--done", &v.id, "--snr", snr],
        );
        assert!(err.contains(why), "--snr {snr}: {err}");
        assert_eq!(
            std::fs::read(d.join("p.json")).unwrap(),
            before,
            "--snr {snr}"
        );
    }
    // A value no method would take (V8): a field's pointing (its stars'
    // are worked out star by star), a supernova's classification spectrum.
    let f = first_of(&p, "field");
    let err = refused(
        d,
        &["plan", "--load", "p.json", "--done", &f.id, "--snr", "40"],
    );
    assert!(
        err.contains(&format!(
            "{}: a field's stars each have their own signal-to-noise, which rung works out from the exposure star by star: a measured one is not taken (note it with --comment)",
            f.id
        )),
        "{err}"
    );
    let t = first_of(&p, "transient");
    let err = refused(
        d,
        &[
            "plan",
            "--load",
            "p.json",
            "--done",
            &t.id,
            "--snr",
            "spectrum=20",
        ],
    );
    let photometric: Vec<&str> = t
        .exposures
        .iter()
        .map(|b| b.band.as_str())
        .filter(|b| *b != "spectrum")
        .collect();
    assert!(
        err.contains(&format!(
            "{}: the signal-to-noise of its spectrum exposure does not enter the distance (those that do: {})",
            t.id,
            photometric.join(", ")
        )),
        "{err}"
    );
    assert_eq!(std::fs::read(d.join("p.json")).unwrap(), before);
    // The options of --done without it (V9: they used to be passed over).
    for (flag, value) in [
        ("--snr", "40"),
        ("--seeing", "1.1"),
        ("--observed", "2026-12-02T01:00:00Z"),
        ("--comment", "cirrus"),
    ] {
        let err = refused(d, &["plan", "--load", "p.json", flag, value]);
        let want = format!("{flag} describes the visits given to --done: give --done ID too");
        assert!(err.contains(&want), "{err}");
        assert_eq!(std::fs::read(d.join("p.json")).unwrap(), before, "{flag}");
    }
}

/// A hand-edited plan file whose measured value is not a signal-to-noise is
/// refused on loading, naming the file, the field and the visit.
#[test]
fn a_plan_file_with_a_bad_measured_snr_names_file_field_and_visit() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = make_plan(d);
    let v = first_of(&p, "parallax");
    let mut j: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("p.json")).unwrap()).unwrap();
    for x in j["visits"].as_array_mut().unwrap() {
        if x["id"] == v.id.as_str() {
            x["status"] = "done".into();
            x["snr_measured"] = serde_json::json!({ v.exposures[0].band.clone(): -5.0 });
        }
    }
    std::fs::write(d.join("bad.json"), serde_json::to_vec(&j).unwrap()).unwrap();
    let err = file::load(&d.join("bad.json")).unwrap_err().to_string();
    assert!(
        err.contains("bad.json")
            && err.contains("snr_measured")
            && err.contains(&v.id)
            && err.contains("-5 is not within (0, 10000]"),
        "{err}"
    );
    // A band the visit did not expose in (it would weigh nothing).
    for x in j["visits"].as_array_mut().unwrap() {
        if x["id"] == v.id.as_str() {
            x["snr_measured"] = serde_json::json!({ "X": 40.0 });
        }
    }
    std::fs::write(d.join("bad.json"), serde_json::to_vec(&j).unwrap()).unwrap();
    let err = file::load(&d.join("bad.json")).unwrap_err().to_string();
    let want = format!(
        "field 'snr_measured': visit '{}': band 'X': it exposes in {}",
        v.id, v.exposures[0].band
    );
    assert!(err.contains("bad.json") && err.contains(&want), "{err}");
}

/// The UI's line typed when marking done: the seeing first, `snr=` words
/// anywhere (as `--snr` takes them), the rest the comment.
#[test]
fn the_ui_line_gives_seeing_snr_and_comment() {
    use rung::tui::update::done_typed;
    let t = done_typed("1.2 snr=62 thin cirrus").unwrap();
    assert_eq!(t.seeing_arcsec, Some(1.2));
    assert_eq!(t.snr_measured, vec![(None, 62.0)]);
    assert_eq!(t.comment.as_deref(), Some("thin cirrus"));
    let t = done_typed("wind SNR=B=55,V=70 gusts").unwrap();
    assert_eq!(t.seeing_arcsec, None);
    assert_eq!(
        t.snr_measured,
        vec![(Some("B".into()), 55.0), (Some("V".into()), 70.0)]
    );
    assert_eq!(t.comment.as_deref(), Some("wind gusts"));
    let t = done_typed("0.9").unwrap();
    assert_eq!(
        (t.seeing_arcsec, t.comment, t.snr_measured),
        (Some(0.9), None, vec![])
    );
    let e = done_typed("1.0 snr=lots").unwrap_err().to_string();
    assert!(e.contains("'lots' is not a signal-to-noise"), "{e}");
}
