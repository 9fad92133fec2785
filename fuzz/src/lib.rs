//! What each fuzz target feeds to rung and which invariants it checks.
//!
//! One function per parser, listed in [`HARNESSES`]. The libFuzzer targets in
//! `fuzz/fuzz_targets/` are one line each over these functions, and the test
//! suite (`tests/fuzz_smoke.rs`) includes this file as a module to run every
//! harness over the committed seeds and deterministic mutations of them, so a
//! crash found by either is the same crash. Besides "no panic", each harness
//! asserts what the parser promises (ranges, round trips, located errors).
//!
//! To add a parser (instrument TOML, plan files, ...): write its function
//! here and add it to [`HARNESSES`], add `fuzz_targets/<name>.rs` (the same
//! three lines as the others) with its `[[bin]]` stanza in `fuzz/Cargo.toml`,
//! and put a few seeds in `fuzz/corpus/<name>/seed-*`.

use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::time::{Instant, parse_date, parse_instant};
use rung::io::angles::{parse_angle_deg, parse_dec_deg, parse_ra_deg};
use rung::io::sites::{parse_sites, site_toml};
use rung::io::targets::{Target, parse_toml, stream_csv_reader};
use std::path::Path;

/// A harness: feeds one input to one parser and checks what it promises.
pub type Harness = fn(&[u8]);

/// Every harness by name; the name is also the fuzz target's and the corpus folder's.
pub const HARNESSES: &[(&str, Harness)] = &[
    ("targets_csv", targets_csv),
    ("targets_toml", targets_toml),
    ("sites_toml", sites_toml),
    ("angles", angles),
    ("times", times),
    ("instruments_toml", instruments_toml),
    ("plan_file", plan_file),
];

fn check_target(t: &Target) {
    assert!((0.0..360.0).contains(&t.ra_deg), "ra {}", t.ra_deg);
    assert!((-90.0..=90.0).contains(&t.dec_deg), "dec {}", t.dec_deg);
    assert!(!t.name.trim().is_empty());
    assert!(t.name.len() <= rung::io::targets::MAX_FIELD_BYTES);
    let p = t.place();
    assert!(p.ra_rad.is_finite() && p.dec_rad.is_finite(), "{p:?}");
    if let Some(d) = t.discovered {
        assert!(d.check_span().is_ok());
    }
}

fn check_problem(e: &rung::RungError) {
    let m = e.to_string();
    assert!(!m.is_empty());
    assert!(
        !m.contains('\n') || m.len() < 400,
        "message spans lines: {m}"
    );
}

/// Targets CSV: arbitrary bytes through the streaming reader (which is also
/// what `parse_csv` and `load` use).
pub fn targets_csv(data: &[u8]) {
    let mut n = 0usize;
    stream_csv_reader(
        data,
        Path::new("fuzz.csv"),
        data.len() as u64,
        &mut |t| {
            check_target(&t);
            n += 1;
        },
        &mut |e| {
            check_problem(&e);
            assert!(e.to_string().starts_with("fuzz.csv"), "unlocated: {e}");
        },
        &mut |w| {
            check_problem(&w);
            assert!(w.to_string().starts_with("fuzz.csv"), "unlocated: {w}");
        },
        &mut |read, total| assert!(read <= total),
    );
}

/// Targets TOML (`[[target]]` tables).
pub fn targets_toml(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let l = parse_toml(text, Path::new("fuzz.toml"));
    for t in &l.targets {
        check_target(t);
    }
    for e in l.problems.iter().chain(&l.warnings) {
        check_problem(e);
        assert!(e.to_string().starts_with("fuzz.toml"), "unlocated: {e}");
    }
}

/// Sites TOML; every site that parses must survive a save-and-read round trip
/// and give an astrometry context. A one-line input is also tried as an
/// inline `--site LAT,LON,ELEV[,ZONE]` spec.
pub fn sites_toml(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if !text.contains('\n')
        && text.contains(',')
        && text.len() < 200
        && let Ok(s) = rung::io::sites::resolve(text)
    {
        assert!(s.lat_deg.abs() <= 89.99);
    }
    match parse_sites(text, Path::new("fuzz-sites.toml")) {
        Err(e) => {
            check_problem(&e);
        }
        Ok(sites) => {
            let t = Instant::from_utc_calendar(2026, 3, 1, 0, 0, 0.0).unwrap();
            for s in &sites {
                let back = parse_sites(&site_toml(s), Path::new("x"))
                    .unwrap_or_else(|e| panic!("saved site does not read back: {e}"));
                assert_eq!(back.len(), 1);
                assert_eq!(&back[0], s);
                let c = Context::exact(s, t).expect("context");
                let o = c.observe(&CatalogPlace::fixed_deg(10.0, -20.0));
                assert!(o.alt_rad.is_finite() && o.az_rad.is_finite(), "{o:?}");
                let h = s.horizon_alt_deg(123.0);
                assert!(h.is_finite());
            }
        }
    }
}

/// RA, Dec and general angles, decimal or sexagesimal.
pub fn angles(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok(r) = parse_ra_deg(text) {
        assert!((0.0..360.0).contains(&r), "ra {r} from {text:?}");
    }
    if let Ok(d) = parse_dec_deg(text) {
        assert!((-90.0..=90.0).contains(&d), "dec {d} from {text:?}");
    }
    if let Ok(a) = parse_angle_deg(text, "angle") {
        assert!(a.is_finite());
    }
}

/// ISO 8601 instants and dates. An accepted instant lies in rung's span and
/// prints back as ISO text that parses to the same second.
pub fn times(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if text.trim().eq_ignore_ascii_case("now") {
        return;
    }
    if let Ok(t) = parse_instant(text) {
        assert!(t.check_span().is_ok(), "{text:?} gave {t:?}");
        let iso = t.iso();
        let back = parse_instant(&iso).unwrap_or_else(|e| panic!("{iso} does not parse: {e}"));
        assert!(
            back.seconds_since(&t).abs() <= 0.5 + 1e-3,
            "{text:?} -> {iso} -> {back:?}"
        );
        let _ = t.tdb(0.1, 5000.0, 1000.0);
        let _ = t.julian_epoch_tt();
    }
    if let Ok(d) = parse_date(text) {
        let site = rung::io::sites::resolve("10,20,0,UTC").expect("site");
        let _ = rung::astro::night::local_noon(&site, d);
    }
}

/// Instrument TOML: an accepted instrument has a positive collecting area and
/// a saturation level; refusals name the file.
pub fn instruments_toml(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match rung::photometry::instrument::parse_instruments(text, Path::new("fuzz.toml")) {
        Ok(list) => {
            for i in &list {
                assert!(i.area_cm2() > 0.0 && i.area_cm2().is_finite(), "{i:?}");
                assert!(i.saturation_e() > 0.0, "{i:?}");
            }
        }
        Err(e) => {
            check_problem(&e);
            assert!(e.to_string().contains("fuzz.toml"), "{e}");
        }
    }
}

/// Plan files: an accepted plan has unique visit ids, each ending after it
/// starts, and saves back to JSON that parses to the same plan.
pub fn plan_file(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match rung::plan::file::parse(text, Path::new("fuzz-plan.json")) {
        Ok(p) => {
            let mut ids = std::collections::BTreeSet::new();
            for v in &p.visits {
                assert!(ids.insert(v.id.clone()), "duplicate id {}", v.id);
                assert!(v.end >= v.start);
            }
            let back = rung::plan::file::parse(&p.to_json(), Path::new("again.json"))
                .unwrap_or_else(|e| panic!("a saved plan does not read back: {e}"));
            assert_eq!(back.visits.len(), p.visits.len());
        }
        Err(e) => {
            check_problem(&e);
            assert!(e.to_string().contains("fuzz-plan.json"), "{e}");
        }
    }
}
