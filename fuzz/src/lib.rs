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
    ("cli_options", cli_options),
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

/// The `rung` command line itself (`src/cli/mod.rs`, included here so that
/// the fuzz target parses with the binary's own option grammar).
#[allow(dead_code, unused_imports, unused_macros, clippy::all)]
#[path = "../../src/cli/mod.rs"]
mod cli;

/// The clock of the option checks (a night at the demo site).
fn fuzz_now() -> Instant {
    parse_instant("2026-12-02T01:00:00Z").expect("fixed clock")
}

/// Options whose number is held to a physical bound (`rung::bounds`), as
/// the commands check them.
const BOUNDED: &[(&str, &rung::bounds::Bound)] = &[
    ("--mag", &rung::bounds::MAG),
    ("--mean-mag", &rung::bounds::MAG),
    ("--peak-mag", &rung::bounds::MAG),
    ("--exptime", &rung::bounds::EXPTIME_S),
    ("--snr", &rung::bounds::SNR),
    ("--limit-snr", &rung::bounds::SNR),
    ("--period-d", &rung::bounds::PERIOD_D),
    ("--amplitude-mag", &rung::bounds::AMPLITUDE_MAG),
    ("--extinction-mag", &rung::bounds::EXTINCTION_MAG),
    ("--redshift", &rung::bounds::REDSHIFT),
    ("--parallax-mas", &rung::bounds::PARALLAX_MAS),
    ("--seeing", &rung::bounds::SEEING_ARCSEC),
];

/// Command-line options: the bytes split at NUL or newline into the
/// arguments after `rung`, parsed by the binary's own grammar (`cli::Cli`,
/// every subcommand and option); a refusal must render to text. Then every
/// `--option value` (or `--option=value`) is read as the commands read it:
/// the programme settings the options choose (`--site` inline or by name,
/// `--instrument`, `--from`, `--to`, `--min-alt`, `--sun-alt`,
/// `--goal-pct`) resolved by `programme::Settings::resolve` with a fixed
/// clock; times (`--at`, `--now`, `--discovered`), dates (`--date`,
/// `--lost-night`), angles (`--ra`, `--dec`) and the bounded numbers
/// (`BOUNDED`). Checks: no panic; an accepted value lies within its range
/// (a site on the globe, limits within their ranges, a non-empty range, a
/// goal in (0, 100] %, angles on the sky, bounded numbers within their
/// bound); a refusal is one line naming what it refuses.
pub fn cli_options(data: &[u8]) {
    use clap::Parser;
    use std::os::unix::ffi::OsStrExt;
    let args: Vec<&std::ffi::OsStr> = data
        .split(|b| *b == 0 || *b == b'\n')
        .take(64)
        .map(std::ffi::OsStr::from_bytes)
        .collect();
    let parsed = cli::Cli::try_parse_from(
        std::iter::once(std::ffi::OsStr::new("rung")).chain(args.iter().copied()),
    );
    if let Err(e) = &parsed {
        assert!(!e.render().to_string().is_empty());
    }
    // The value of each option, as text (the last one given wins, as in clap).
    let mut opts: std::collections::BTreeMap<String, String> = Default::default();
    let mut it = args
        .iter()
        .map(|a| a.to_string_lossy().into_owned())
        .peekable();
    while let Some(a) = it.next() {
        if !a.starts_with("--") {
            continue;
        }
        match a.split_once('=') {
            Some((k, v)) => {
                opts.insert(k.to_string(), v.to_string());
            }
            None => {
                if let Some(v) = it.next_if(|v| !v.starts_with("--")) {
                    opts.insert(a, v);
                }
            }
        }
    }
    let refused = |e: &dyn std::fmt::Display| {
        let m = e.to_string();
        assert!(!m.is_empty());
        assert!(!m.contains('\n'), "message spans lines: {m}");
    };
    let num = |k: &str| opts.get(k).and_then(|v| v.trim().parse::<f64>().ok());
    let choices = rung::programme::Choices {
        site: opts.get("--site").cloned(),
        instrument: opts.get("--instrument").cloned(),
        from: opts.get("--from").cloned(),
        to: opts.get("--to").cloned(),
        min_alt_deg: num("--min-alt"),
        sun_alt_deg: num("--sun-alt"),
        goal_pct: num("--goal-pct").or(num("--goal")),
    };
    let req = rung::programme::Request {
        cli: choices,
        ..Default::default()
    };
    match rung::programme::Settings::resolve(&req, fuzz_now()) {
        Ok(s) => {
            assert!(
                (-90.0..=90.0).contains(&s.site.lat_deg),
                "{}",
                s.site.lat_deg
            );
            assert!(s.site.lon_deg.is_finite() && s.site.elev_m.is_finite());
            assert!(s.from <= s.to, "{} > {}", s.from, s.to);
            assert!((-90.0..=90.0).contains(&s.limits.min_alt_deg));
            assert!((-90.0..=0.0).contains(&s.limits.sun_alt_deg));
            if let Some(g) = s.goal_pct {
                assert!(g > 0.0 && g <= 100.0, "goal {g}");
            }
        }
        Err(e) => refused(&e),
    }
    for k in ["--at", "--now", "--discovered"] {
        if let Some(v) = opts.get(k) {
            match parse_instant(v) {
                Ok(t) => assert!(t.check_span().is_ok()),
                Err(e) => refused(&e),
            }
        }
    }
    for k in ["--date", "--lost-night"] {
        if let Some(Err(e)) = opts.get(k).map(|v| parse_date(v)) {
            refused(&e);
        }
    }
    if let Some(v) = opts.get("--ra") {
        match parse_ra_deg(v) {
            Ok(x) => assert!((0.0..360.0).contains(&x), "ra {x}"),
            Err(e) => refused(&e),
        }
    }
    if let Some(v) = opts.get("--dec") {
        match parse_dec_deg(v) {
            Ok(x) => assert!((-90.0..=90.0).contains(&x), "dec {x}"),
            Err(e) => refused(&e),
        }
    }
    for (k, b) in BOUNDED {
        if let Some(x) = num(k) {
            match b.check_as(k, x) {
                Ok(v) => assert!(v.is_finite() && b.contains(v), "{k} {v}"),
                Err(e) => {
                    refused(&e);
                    assert!(e.to_string().contains(k), "{e}");
                }
            }
        }
    }
}
