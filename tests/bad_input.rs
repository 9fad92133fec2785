//! Every bad input listed in docs/bad-input.md, with the exact one-line
//! message rung answers. The table there and the cases here are the same
//! list (same ids); a changed message must change both.

use rung::astro::frames::Context;
use rung::astro::night::Night;
use rung::astro::time::{Instant, parse_date, parse_instant};
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::sites::{add_site_to_file, parse_sites, resolve};
use rung::io::targets::{load, parse_csv, parse_toml};
use std::path::Path;

const SPAN: &str = "is outside rung's valid span (1960-01-01 to 2099-12-31): the Earth ephemeris (SOFA epv00) covers 1900-2100 and UTC starts in 1960";
const ISO: &str =
    "expected ISO 8601 such as 2026-12-01T23:15:00Z (UTC), 2026-12-01T20:15:00-03:00, or 'now'";
const RA: &str = "expected degrees 0..360 (83.63) or hours HH:MM:SS.s below 24h (05:34:31.9)";
const EXPOSURE: &str =
    "an exposure takes time, and one visit's exposure cannot last longer than a day (86,400 s)";

fn err<T>(r: rung::Result<T>) -> String {
    match r {
        Err(e) => e.to_string(),
        Ok(_) => panic!("bad input accepted"),
    }
}

fn check(id: &str, got: String, want: String) {
    assert_eq!(got, want, "case {id}");
    assert!(!got.contains('\n'), "case {id}: message spans lines");
}

/// The problems of a CSV text, with how many targets still loaded.
fn csv(text: &str) -> (Vec<String>, usize) {
    let l = parse_csv(text, Path::new("t.csv"));
    (
        l.problems.iter().map(|p| p.to_string()).collect(),
        l.targets.len(),
    )
}

fn toml(text: &str) -> (Vec<String>, usize) {
    let l = parse_toml(text, Path::new("t.toml"));
    (
        l.problems.iter().map(|p| p.to_string()).collect(),
        l.targets.len(),
    )
}

#[test]
fn times_and_dates() {
    let site = resolve("-30,-70,100,America/Santiago").unwrap();
    for (id, got, want) in [
        ("T1", err(parse_instant("yesterday")), format!("cannot read time from 'yesterday': {ISO}")),
        ("T2", err(parse_instant("2026-13-01T00:00:00Z")), format!("cannot read time from '2026-13-01T00:00:00Z': {ISO}")),
        ("T3", err(parse_instant("2017-12-31T23:59:60Z")), "invalid time: 2017-12-31 23:59:60.000 does not exist: second 60 occurs only at 23:59 of a day that ends with a leap second (such as 2016-12-31)".into()),
        ("T4", err(parse_instant("1959-12-31T23:59:59Z")), format!("1959-12-31 {SPAN}")),
        ("T5", err(parse_date("2026-02-30")), "cannot read date from '2026-02-30': expected YYYY-MM-DD, a real calendar date such as 2026-12-01".into()),
        ("T6", err(parse_date("2100-01-01")), format!("2100-01-01 {SPAN}")),
        ("T7", err(Night::new(&site, "2099-12-31".parse().unwrap())), format!("the night of 2099-12-31 (it ends at local noon of 2100-01-01) {SPAN}")),
        ("T8", err(Context::exact(&site, Instant { utc1: 2_400_000.5, utc2: 0.0 })), format!("1858-11-17T00:00:00Z {SPAN}")),
    ] {
        check(id, got, want);
    }
}

#[test]
fn angles() {
    for (id, got, want) in [
        ("A1", err(parse_ra_deg("24:00:00")), format!("cannot read right ascension from '24:00:00': {RA}")),
        ("A2", err(parse_ra_deg("12:60:00")), format!("cannot read right ascension from '12:60:00': {RA}")),
        ("A3", err(parse_dec_deg("+91:00:00")), "cannot read declination from '+91:00:00': expected degrees -90..+90 (-5.39) or ±DD:MM:SS.s (+22:00:52)".into()),
        ("A4", err(parse_ra_deg("nan")), format!("cannot read right ascension from 'nan': {RA}")),
    ] {
        check(id, got, want);
    }
}

#[test]
fn sites() {
    let s = |t: &str| err(parse_sites(t, Path::new("s.toml")));
    for (id, got, want) in [
        ("S1", err(resolve("95,0,0")), "invalid latitude: 95 is not within -90..+90 degrees".to_string()),
        ("S2", err(resolve("10,20,30,Not/AZone")), "cannot read time zone from 'Not/AZone': expected an IANA zone such as America/Santiago".into()),
        ("S3", s("[[site]]\nname = \"a\"\nlat_deg = 95\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\n"), "s.toml, line 3, field 'lat_deg': 95 is not within -90..+90 degrees".into()),
        ("S4", s("[[site]]\nname = \"a\nlat_deg = 10\n"), "s.toml, line 2: invalid basic string, expected `\"`".into()),
        ("S5", s("[[site]]\nname = \"a\"\nlattitude = 10\n"), "s.toml, line 3, field 'lattitude': unknown field `lattitude`, expected one of `name`, `lat_deg`, `lon_deg`, `elev_m`, `timezone`, `pressure_hpa`, `temperature_c`, `humidity`, `sun_avoid_deg`, `horizon`, `description`, `clear_fraction`, `clear_source`, `semesters`".into()),
        ("S6", s("[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"Mars/Olympus\"\n"), "s.toml, line 6, field 'timezone': 'Mars/Olympus' is not an IANA time zone".into()),
        ("S7", s("[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\n\n[[site]]\nname = \"A\"\nlat_deg = 20\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\n"), "s.toml, line 9, field 'name': site 'A' is named twice in this file (first at line 1); rename or remove one".into()),
        ("S8", s("[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\nclear_fraction = [0.5, 0.5, 0.5, 1.2, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5]\n"), "s.toml, line 7, field 'clear_fraction': 1.2 for month 4 is not a fraction of nights in (0, 1]".into()),
        ("S9", s("[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\nclear_fraction = [0.5, 0.5]\n"), "s.toml, line 7, field 'clear_fraction': invalid length 2, expected an array of length 12".into()),
        ("S10", s("[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\nsemesters = [{ name = \"A\", start_month = 4 }, { name = \"B\", start_month = 4 }]\n"), "s.toml, line 7, field 'semesters': two semesters start in month 4".into()),
        ("S11", s("[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\nsemesters = [{ name = \"A\", start_month = 13 }]\n"), "s.toml, line 7, field 'semesters': start_month 13 of 'A' is not a month 1-12".into()),
    ] {
        check(id, got, want);
    }
}

#[test]
fn corrupt_site_catalogue_is_never_overwritten() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("sites.toml");
    let broken = "# my sites\n[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = \n";
    std::fs::write(&p, broken).unwrap();
    let site = resolve("-30,-70,100,America/Santiago").unwrap();
    check(
        "F3",
        err(add_site_to_file(&p, &site)),
        format!(
            "{}, line 5: string values must be quoted, expected literal string (the file is left unchanged; mend it, then add the site again)",
            p.display()
        ),
    );
    assert_eq!(std::fs::read_to_string(&p).unwrap(), broken);
    assert!(!rung::io::atomic::backup_path(&p).exists());
    // Mended, the site is added after the comment and the old text is kept as .bak.
    let mended = broken.replace(
        "lon_deg = \n",
        "lon_deg = 20\nelev_m = 5\ntimezone = \"UTC\"\n",
    );
    std::fs::write(&p, &mended).unwrap();
    add_site_to_file(&p, &site).unwrap();
    let now = std::fs::read_to_string(&p).unwrap();
    assert!(now.starts_with(&mended), "{now}");
    assert_eq!(parse_sites(&now, &p).unwrap().len(), 2);
    assert_eq!(
        std::fs::read_to_string(rung::io::atomic::backup_path(&p)).unwrap(),
        mended
    );
    check(
        "F4",
        err(add_site_to_file(&p, &site)),
        format!(
            "invalid site: {} already has a site named 'inline'; edit that entry instead",
            p.display()
        ),
    );
}

#[test]
fn targets_csv() {
    let c2_ra =
        format!("t.csv, line 2, field 'ra': cannot read right ascension from '25:00:00': {RA}");
    for (id, text, want, loaded) in [
        (
            "C1",
            "name,ra\nA,1\n",
            "t.csv, line 1, field 'dec': the header has no 'dec' column (required: name, ra, dec)",
            0,
        ),
        (
            "C2",
            "name,ra,dec\nA,25:00:00,10\nB,1,2\n",
            c2_ra.as_str(),
            1,
        ),
        (
            "C3",
            "name,ra,dec\nA,1,2,3\nB,1,2\n",
            "t.csv, line 2: row has 4 fields but the header has 3",
            1,
        ),
        (
            "C4",
            "name,ra,dec\nA,1,2\nA,3,4\n",
            "t.csv, line 3, field 'name': 'A' is already used by an earlier row",
            1,
        ),
        (
            "C5",
            "name,ra,dec,kind\nA,1,2,parallax\n",
            "t.csv, line 2, field 'parallax_mas': is required for a parallax target",
            0,
        ),
        (
            "C6",
            "name,ra,dec,kind\nA,1,2,quasar\n",
            "t.csv, line 2, field 'kind': 'quasar' is not one of parallax, pulsator, transient, field, plain",
            0,
        ),
        (
            "C7",
            "name,ra,dec,mag\nA,1,2,bright\n",
            "t.csv, line 2, field 'mag': 'bright' is not a finite number",
            0,
        ),
        (
            "C8",
            "name,ra,dec,kind,period_d,epoch_max_bjd\nA,1,2,pulsator,5.3,2430000.5\n",
            "t.csv, line 2, field 'epoch_max_bjd': must lie within rung's valid span 1960-01-01 to 2099-12-31 (BJD 2436934.5 to 2488069.5)",
            0,
        ),
        (
            "C9",
            "name,ra,dec,epoch_yr\nA,1,2,1950\n",
            "t.csv, line 2, field 'epoch_yr': must be a Julian year within rung's valid span, 1960.0 to 2100.0",
            0,
        ),
        (
            "C10",
            "name,ra,dec,kind,discovered,peak_mag\nA,1,2,transient,2026-11-20T25:00:00Z,15\n",
            "t.csv, line 2, field 'discovered': cannot read time from '2026-11-20T25:00:00Z': expected ISO 8601 such as 2026-12-01T23:15:00Z (UTC), 2026-12-01T20:15:00-03:00, or 'now'",
            0,
        ),
        (
            "C11",
            "name,ra,dec\n\"A,1,2\n",
            "t.csv, line 2, field 'name': the quote opening this field is never closed; the lines after it are read as rows of their own",
            0,
        ),
    ] {
        let (p, n) = csv(text);
        assert_eq!(p.len(), 1, "case {id}: {p:?}");
        check(id, p[0].clone(), want.to_string());
        assert_eq!(n, loaded, "case {id}: good rows beside the bad one");
    }
    // C12: a row that is not UTF-8 (a Latin-1 file): that row only is refused.
    let d = tempfile::tempdir().unwrap();
    let f = d.path().join("latin1.csv");
    std::fs::write(&f, b"name,ra,dec\nA,1,2\nB\xe9,3,4\nC,5,6\n").unwrap();
    let l = load(&f).unwrap();
    assert_eq!(l.targets.len(), 2);
    check(
        "C12",
        l.problems[0].to_string(),
        format!(
            "{}, line 3: field 1 is not UTF-8 text (save the file as UTF-8); row skipped",
            f.display()
        ),
    );
    // C13/C14 (a 10 MiB field; a field over MAX_FIELD_BYTES) are checked in tests/scale.rs.
}

#[test]
fn targets_toml() {
    for (id, text, want, loaded) in [
        (
            "O1",
            "[[target]\nname = 1\n",
            "t.toml, line 1: not valid TOML: unclosed array table, expected `]`",
            0,
        ),
        (
            "O2",
            "title = \"x\"\n",
            "t.toml, line 1, field 'target': no [[target]] tables found",
            0,
        ),
        (
            "O3",
            "[[target]]\nname = \"A\"\nra = [1, 2]\ndec = 3\n\n[[target]]\nname = \"B\"\nra = 1\ndec = 2\n",
            "t.toml, line 1, field 'ra': must be a single value",
            1,
        ),
        (
            "O4",
            "[[target]]\nname = \"A\"\nra = 1\ndec = 2\n\n[[target]]\nname = \"B\"\nra = 1\ndec = 100\n",
            "t.toml, line 6, field 'dec': cannot read declination from '100': expected degrees -90..+90 (-5.39) or ±DD:MM:SS.s (+22:00:52)",
            1,
        ),
    ] {
        let (p, n) = toml(text);
        assert_eq!(p.len(), 1, "case {id}: {p:?}");
        check(id, p[0].clone(), want.to_string());
        assert_eq!(n, loaded, "case {id}");
    }
}

#[test]
fn files() {
    let d = tempfile::tempdir().unwrap();
    check(
        "F1",
        err(load(d.path())),
        format!("invalid targets file: {} is a folder", d.path().display()),
    );
    let m = d.path().join("missing.csv");
    check(
        "F2",
        err(load(&m)),
        format!("{}: No such file or directory (os error 2)", m.display()),
    );
}

#[test]
fn toml_errors_point_at_the_right_table() {
    // A header written `[[ target ]]` used to be missed, so the errors of the
    // tables after it named the line of the next table (or "line 0").
    let t = "[[ target ]]\nname = \"A\"\nra = 1\ndec = 100\n\n[[target]] # second\nname = \"B\"\nra = 1\ndec = 2\n\n[[target]]\nname = \"C\"\nra = 1\ndec = 200\n";
    let (p, n) = toml(t);
    assert_eq!(n, 1);
    assert!(p[0].starts_with("t.toml, line 1, field 'dec'"), "{}", p[0]);
    assert!(p[1].starts_with("t.toml, line 11, field 'dec'"), "{}", p[1]);
    // Tables written inline have no header line: the line is left out, not invented.
    let (p, _) = toml("target = [{ name = \"A\", ra = 1, dec = 100 }]\n");
    assert!(p[0].starts_with("t.toml, field 'dec'"), "{}", p[0]);
    let e = err(parse_sites(
        "[[ site ]]\nname = \"a\"\nlat_deg = 95\nlon_deg = 1\nelev_m = 0\ntimezone = \"UTC\"\n",
        Path::new("s.toml"),
    ));
    assert!(e.starts_with("s.toml, line 3, field 'lat_deg'"), "{e}");
}

#[test]
fn header_problems_name_the_header_line() {
    // Comment lines before the header (as in the demo programme) count.
    let (p, _) = csv("# my programme\n# second comment\nname,ra\nA,1\n");
    assert_eq!(
        p[0],
        "t.csv, line 3, field 'dec': the header has no 'dec' column (required: name, ra, dec)"
    );
}

/// A small plan file as rung saves it (pretty JSON, one visit); `FP` stands
/// for the targets fingerprint. Line numbers below count from its first line.
const PLAN: &str = r#"{
  "format": "rung-plan/1",
  "site": "pampa-lucero",
  "targets_file": "t.csv",
  "targets_fingerprint": "FP",
  "from": "2026-03-01",
  "to": "2026-03-03",
  "hours_per_night": 3.0,
  "min_alt_deg": 30.0,
  "sun_alt_deg": -12.0,
  "lost_nights": [],
  "visits": [
    {
      "id": "A#1",
      "target": "A",
      "kind": "plain",
      "night": "2026-03-01",
      "start": "2026-03-02T01:00:00Z",
      "end": "2026-03-02T01:10:00Z",
      "exptime_s": 60.0,
      "n_exposures": 1,
      "snr": 100.0,
      "airmass": 1.2,
      "status": "planned",
      "cautions": []
    }
  ]
}
"#;

#[test]
fn plan_files() {
    use rung::io::targets::Target;
    use rung::plan::file::{load, parse};
    use rung::plan::schedule::fingerprint;
    let ours = vec![Target::plain("A", 10.0, -20.0)];
    let other = vec![Target::plain("B", 10.0, -20.0)];
    let (fa, fb) = (fingerprint(&ours), fingerprint(&other));
    let good = PLAN.replace("FP", &fa);
    let p = Path::new("p.json");
    // The good plan beside the bad ones loads and belongs to its own list.
    let plan = parse(&good, p).expect("the good plan reads");
    plan.check_targets(&ours, p).expect("its own targets");
    let bad = |from: &str, to: &str| {
        assert!(good.contains(from), "{from}");
        err(parse(&good.replacen(from, to, 1), p))
    };
    let mut marked = plan.clone();
    // The same visit written twice.
    let v0 = good.find("    {\n      \"id\"").unwrap();
    let v1 = good.find("    }\n  ]").unwrap() + "    }".len();
    let visit = &good[v0..v1];
    let twice = good.replacen(visit, &format!("{visit},\n{visit}"), 1);
    for (id, got, want) in [
        ("P1", err(plan.check_targets(&other, p)), format!("p.json, field 'targets_fingerprint': this plan was made for another targets list (t.csv, fingerprint {fa}); the list given has fingerprint {fb}. Nothing was changed")),
        ("P2", err(parse(&good[..good.find("\"visits\"").unwrap()], p)), "p.json, line 12: not a readable plan file (column 2): EOF while parsing a value".into()),
        ("P3", err(parse("", p)), "p.json, line 1: not a readable plan file (column 0): EOF while parsing a value".into()),
        ("P4", bad("\"kind\": \"plain\"", "\"kind\": \"quasar\""), "p.json, line 16, field 'kind': not a readable plan file (column 22): unknown variant `quasar`, expected one of `parallax`, `pulsator`, `transient`, `field`, `plain`".into()),
        ("P5", bad("\"status\": \"planned\"", "\"status\": \"maybe\""), "p.json, line 24, field 'status': not a readable plan file (column 23): unknown variant `maybe`, expected one of `planned`, `done`, `lost`".into()),
        ("P6", bad("\"start\": \"2026-03-02T01:00:00Z\"", "\"start\": \"2026-03-02T25:00:00Z\""), format!("p.json, line 18, field 'start': not a readable plan file (column 37): cannot read time from '2026-03-02T25:00:00Z': {ISO}")),
        ("P7", bad("  \"lost_nights\": [],\n", "  \"lost_nights\": [],\n  \"notes\": \"x\",\n"), "p.json, line 12, field 'notes': not a readable plan file (column 9): unknown field `notes`, expected one of `format`, `site`, `targets_file`, `targets_fingerprint`, `from`, `to`, `hours_per_night`, `min_alt_deg`, `sun_alt_deg`, `instrument`, `lost_nights`, `visits`, `horizon_to`, `log_seq`".into()),
        ("P8", bad("rung-plan/1", "rung-plan/9"), "p.json, field 'format': 'rung-plan/9' is not a plan format rung reads (expected rung-plan/1)".into()),
        ("P9", bad("\"hours_per_night\": 3.0", "\"hours_per_night\": -1.0"), "p.json, field 'hours_per_night': -1 is not within (0, 24] hours".into()),
        ("P10", bad("\"min_alt_deg\": 30.0", "\"min_alt_deg\": 120.0"), "p.json, field 'min_alt_deg': 120 is not within -1..89 degrees".into()),
        ("P11", bad("\"from\": \"2026-03-01\"", "\"from\": \"2026-04-01\""), "p.json, field 'to': 2026-03-03 is before 'from' 2026-04-01".into()),
        ("P12", bad("\"to\": \"2026-03-03\"", "\"to\": \"2030-01-01\""), "p.json, field 'to': 2026-03-01 to 2030-01-01 is 1403 nights, longer than the 1098 nights a plan may span".into()),
        ("P13", bad("\"to\": \"2026-03-03\"", "\"to\": \"2100-01-03\""), format!("p.json, field 'to': 2100-01-03 {SPAN}")),
        ("P14", bad("\"end\": \"2026-03-02T01:10:00Z\"", "\"end\": \"2026-03-02T00:50:00Z\""), "p.json, field 'visits': visit 'A#1' ends before it starts".into()),
        ("P15", err(parse(&twice, p)), "p.json, field 'visits': visit id 'A#1' appears twice".into()),
        ("P20", bad("\"exptime_s\": 60.0", "\"exptime_s\": -60.0"), format!("p.json, field 'exptime_s': visit 'A#1': -60 s is not within (0, 86400] s: {EXPOSURE}")),
        ("P21", bad("\"night\": \"2026-03-01\"", "\"night\": \"2030-01-05\""), "p.json, field 'night': visit 'A#1': 2030-01-05 is outside the plan's nights, 2026-03-01 to 2026-03-03".into()),
        ("P22", bad("\"lost_nights\": []", "\"lost_nights\": [\"1970-01-01\"]"), "p.json, field 'lost_nights': 1970-01-01 is outside the plan's nights, 2026-03-01 to 2026-03-03".into()),
        ("P23", bad("\"end\": \"2026-03-02T01:10:00Z\"", "\"end\": \"2026-03-05T01:10:00Z\""), "p.json, field 'end': visit 'A#1': 2026-03-05T01:10:00Z is not in its night of 2026-03-01".into()),
        ("P24", bad("\"n_exposures\": 1", "\"n_exposures\": 0"), "p.json, field 'n_exposures': visit 'A#1': 0 is not within 1..10000 sub-exposures".into()),
        // The seeing noted with a mark: the instruments' bound (bounds::SEEING_ARCSEC).
        ("P25", bad("\"cautions\": []", "\"cautions\": [],\n      \"seeing_arcsec\": -3.0"), "p.json, field 'seeing_arcsec': visit 'A#1': -3 arcsec is not within (0, 30] arcsec: a star image is never a point, and beyond 30 arcsec nothing is measured".into()),
        // A band's own exposure (the sheet and the CSV show it) and the
        // place kept for a target no longer listed.
        ("P26", bad("\"cautions\": []", "\"cautions\": [],\n      \"exposures\": [{\"band\": \"V\", \"exptime_s\": 60.0, \"n_exposures\": 1, \"snr\": -5.0}]"), "p.json, field 'exposures': visit 'A#1': band 'V': snr -5 is not a signal-to-noise (a positive number)".into()),
        ("P27", bad("\"cautions\": []", "\"cautions\": [],\n      \"exposures\": [{\"band\": \"V\", \"exptime_s\": 60.0, \"n_exposures\": 0, \"snr\": 100.0}]"), "p.json, field 'exposures': visit 'A#1': band 'V': n_exposures 0 is not within 1..10000 sub-exposures".into()),
        ("P28", bad("\"cautions\": []", "\"cautions\": [],\n      \"exposures\": [{\"band\": \" \", \"exptime_s\": 60.0, \"n_exposures\": 1, \"snr\": 100.0}]"), "p.json, field 'exposures': visit 'A#1': an exposure without a band".into()),
        ("P29", bad("\"cautions\": []", "\"cautions\": [],\n      \"ra_deg\": 400.0,\n      \"dec_deg\": -20.0"), "p.json, field 'ra_deg': visit 'A#1': 400 is not a right ascension within 0..360 degrees".into()),
        ("P30", bad("\"cautions\": []", "\"cautions\": [],\n      \"ra_deg\": 10.0,\n      \"dec_deg\": -95.0"), "p.json, field 'dec_deg': visit 'A#1': -95 is not a declination within -90..90 degrees".into()),
        ("V1", err(marked.mark(&["A#9".into()], rung::plan::schedule::Status::Done)), "unknown visit 'A#9'; visit ids look like NAME#N (see the plan's CSV or JSON)".into()),
    ] {
        check(id, got, want);
    }
    // Files: a folder, bytes that are not UTF-8 (nothing is written either way).
    let d = tempfile::tempdir().unwrap();
    check(
        "P16",
        err(load(d.path())),
        format!("invalid plan file: {} is a folder", d.path().display()),
    );
    let f = d.path().join("latin1.json");
    std::fs::write(&f, b"{\n  \"site\": \"caf\xe9\"\n}\n").unwrap();
    check(
        "P17",
        err(load(&f)),
        format!(
            "{}, line 2: not UTF-8 text: a plan file is the JSON that rung saves",
            f.display()
        ),
    );
    assert_eq!(
        std::fs::read(&f).unwrap(),
        b"{\n  \"site\": \"caf\xe9\"\n}\n"
    );
}

#[test]
fn budgets_and_ranges() {
    use rung::plan::budget::check_goal;
    use rung::plan::schedule::dates;
    let day = |s: &str| s.parse::<chrono::NaiveDate>().unwrap();
    for (id, got, want) in [
        ("B1", err(check_goal(0.0)), "invalid goal: 0 % is not a distance precision in (0, 100] %".to_string()),
        ("B2", err(check_goal(-3.0)), "invalid goal: -3 % is not a distance precision in (0, 100] %".into()),
        ("B3", err(check_goal(101.0)), "invalid goal: 101 % is not a distance precision in (0, 100] %".into()),
        ("B4", err(check_goal(f64::NAN)), "invalid goal: NaN % is not a distance precision in (0, 100] %".into()),
        ("D1", err(dates(day("2026-06-01"), day("2026-03-01"))), "invalid date range: --from 2026-06-01 is after --to 2026-03-01".into()),
        ("D2", err(dates(day("2026-03-01"), day("2036-06-01"))), "invalid date range: 3746 nights is longer than the 1098 nights a plan or a budget may span".into()),
        ("D3", err(rung::plan::season::nights_in(day("2026-03-01"), day("2046-03-01"))), "invalid date range: 2026-03-01 to 2046-03-01 is 7306 nights; a season scan covers at most 3653 nights (10 years)".into()),
    ] {
        check(id, got, want);
    }
    // A one-night range is not empty: it is that night.
    assert_eq!(
        dates(day("2026-03-01"), day("2026-03-01")).unwrap().len(),
        1
    );
}

/// `rung ARGS` with an empty user config folder: (exit code, stderr).
fn cli(args: &[&str]) -> (Option<i32>, String) {
    let cfg = tempfile::tempdir().unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", cfg.path())
        .env_remove("RUNG_DEMO_DIR")
        .output()
        .expect("run the rung binary");
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stderr).to_string(),
    )
}

/// One line `rung: error: <want>` on stderr and exit code 2.
fn check_cli(id: &str, args: &[&str], want: &str) {
    let (code, err) = cli(args);
    assert!(!err.contains("panicked"), "case {id}: {err}");
    assert_eq!(err, format!("rung: error: {want}\n"), "case {id}");
    assert_eq!(code, Some(2), "case {id}");
}

#[test]
fn plan_and_budget_options() {
    const T: &str = "targets-demo/targets.csv";
    let season = [
        "--site",
        "pampa-lucero",
        "--targets",
        T,
        "--from",
        "2026-03-01",
    ];
    let budget = |extra: &[&str]| -> Vec<String> {
        let mut v: Vec<String> = ["budget", "--to", "2026-06-01"]
            .iter()
            .chain(season.iter())
            .map(|s| s.to_string())
            .collect();
        v.extend(extra.iter().map(|s| s.to_string()));
        v
    };
    let plan = |extra: &[&str]| -> Vec<String> {
        let mut v: Vec<String> = ["plan", "--to", "2026-03-05"]
            .iter()
            .chain(season.iter())
            .map(|s| s.to_string())
            .collect();
        v.extend(extra.iter().map(|s| s.to_string()));
        v
    };
    let run = |id: &str, args: Vec<String>, want: &str| {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        check_cli(id, &a, want);
    };
    // A negative value used to stop in the argument parser with a usage screen.
    run(
        "B2",
        budget(&["--goal", "-3"]),
        "invalid --goal-pct: -3 % is not a distance precision in (0, 100] %",
    );
    run(
        "I1",
        budget(&["--goal", "3", "--instrument", "nope-2m"]),
        "invalid --instrument: unknown instrument 'nope-2m'; known instruments: lucero-1m, alcaravan-2m, lucero-1m-ir",
    );
    run(
        "H4",
        budget(&["--hours", "-4"]),
        "invalid --hours: -4 is not a number of hours within 0..1000000",
    );
    run(
        "H5",
        budget(&["--hours", "10", "--nights", "3"]),
        "invalid hours asked: give one of --hours H, --hours-per-semester LABEL=H,... or --nights N",
    );
    // It used to print the table's header alone.
    check_cli(
        "V17",
        &["next", "--rows", "0"],
        "--rows 0 would show no row: give 1 or more (leave --rows out for all)",
    );
    run(
        "H6",
        budget(&["--hours-per-semester", "2031A=5"]),
        "invalid --hours-per-semester: 2031A is not a semester of the range 2026-03-01 to 2026-06-01 (its semesters: 2026A)",
    );
    run(
        "H7",
        budget(&["--hours-per-semester", "2026A=5,2026A=6"]),
        "invalid --hours-per-semester: 2026A is given twice",
    );
    run(
        "H8",
        budget(&["--hours", "10", "--confidence", "1.5"]),
        "invalid --confidence: 1.5 is not a quantile within 0.5..0.999",
    );
    run(
        "H1",
        plan(&["--hours-per-night", "-2"]),
        "invalid --hours-per-night: -2 is not within (0, 24] hours",
    );
    run(
        "H2",
        plan(&["--hours-per-night", "20"]),
        "invalid --hours-per-night: 20.00 h is longer than the longest dark time in the range (9.77 h with the Sun below -12°)",
    );
    run("H3", plan(&[]), "give --hours-per-night H");
    run(
        "D5",
        plan(&["--hours-per-night", "3", "--horizon-to", "2026-03-04"]),
        "--horizon-to: 2026-03-04 is before the plan's last night 2026-03-05: the methods plan at least to it (give a later night, or leave --horizon-to out)",
    );
    run(
        "I2",
        plan(&["--hours-per-night", "3", "--instrument", "nope-2m"]),
        "invalid --instrument: unknown instrument 'nope-2m'; known instruments: lucero-1m, alcaravan-2m, lucero-1m-ir",
    );
    run(
        "D4",
        vec![
            "plan".into(),
            "--targets".into(),
            T.into(),
            "--from".into(),
            "2026-03-01".into(),
            "--to".into(),
            "2026-03-05".into(),
        ],
        "give --hours-per-night H",
    );

    // A saved plan, then marks and loads that go wrong; the file is never touched.
    let d = tempfile::tempdir().unwrap();
    let saved = d.path().join("p.json");
    let s = saved.to_str().unwrap();
    let (code, err) = cli(&plan(&["--hours-per-night", "3", "--save", s])
        .iter()
        .map(String::as_str)
        .collect::<Vec<_>>());
    assert_eq!(code, Some(0), "{err}");
    let text = std::fs::read_to_string(&saved).unwrap();
    check_cli(
        "V2",
        &["plan", "--load", s, "--done", "NOPE#7"],
        "--done: unknown visit 'NOPE#7'; visit ids look like NAME#N (see the plan's CSV or JSON)",
    );
    check_cli(
        "V3",
        &["plan", "--load", s, "--lost", "NOPE#7"],
        "--lost: unknown visit 'NOPE#7'; visit ids look like NAME#N (see the plan's CSV or JSON)",
    );
    check_cli(
        "V4",
        &["plan", "--load", s, "--lost-night", "2026-02-30"],
        "--lost-night: cannot read date from '2026-02-30': expected YYYY-MM-DD, a real calendar date such as 2026-12-01",
    );
    // The horizon the plan was made with, as saved.
    let made_to = serde_json::from_str::<serde_json::Value>(&text).unwrap()["horizon_to"]
        .as_str()
        .unwrap()
        .to_string();
    check_cli(
        "V5",
        &[
            "plan",
            "--load",
            s,
            "--replan",
            "--horizon-to",
            "2027-03-05",
        ],
        &format!(
            "--horizon-to applies when a plan is made (or rebuilt with --rebuild): a loaded plan keeps the horizon it was made with ({made_to})"
        ),
    );
    // A visit of the plan marked done at an instant outside the span.
    let first_id = serde_json::from_str::<serde_json::Value>(&text).unwrap()["visits"][0]["id"]
        .as_str()
        .unwrap()
        .to_string();
    check_cli(
        "V7",
        &[
            "plan",
            "--load",
            s,
            "--done",
            &first_id,
            "--observed",
            "1800-01-01T00:00:00Z",
        ],
        "--observed: 1800-01-01 is outside rung's valid span (1960-01-01 to 2099-12-31): the Earth ephemeris (SOFA epv00) covers 1900-2100 and UTC starts in 1960",
    );
    let other = d.path().join("other.csv");
    std::fs::write(&other, "name,ra,dec\nX-1,10,-20\n").unwrap();
    let fp_other =
        rung::plan::schedule::fingerprint(&rung::io::targets::load(&other).unwrap().targets);
    let fp_ours = rung::plan::file::parse(&text, &saved)
        .unwrap()
        .targets_fingerprint;
    check_cli(
        "P1",
        &["plan", "--load", s, "--targets", other.to_str().unwrap()],
        &format!(
            "{s}, field 'targets_fingerprint': this plan was made for another targets list ({T}, fingerprint {fp_ours}); the list given has fingerprint {fp_other}. Nothing was changed"
        ),
    );
    let edited = d.path().join("edited.json");
    let e = edited.to_str().unwrap();
    std::fs::write(
        &edited,
        text.replacen("\"site\": \"pampa-lucero\"", "\"site\": \"nowhere\"", 1),
    )
    .unwrap();
    check_cli(
        "P18",
        &["plan", "--load", e],
        &format!(
            "{e}, field 'site': unknown site 'nowhere'; known sites: pampa-lucero, sierra-alcaravan; or give LAT,LON,ELEV_M (degrees, east-positive longitude, metres)"
        ),
    );
    std::fs::write(
        &edited,
        text.replacen(
            &format!("\"targets_file\": \"{T}\""),
            "\"targets_file\": \"gone.csv\"",
            1,
        ),
    )
    .unwrap();
    check_cli(
        "P19",
        &["plan", "--load", e],
        &format!("{e}, field 'targets_file': gone.csv: No such file or directory (os error 2)"),
    );
    assert_eq!(
        std::fs::read_to_string(&saved).unwrap(),
        text,
        "a refused command leaves the plan alone"
    );
}

#[test]
fn method_options() {
    let p = |extra: &[&str]| -> Vec<String> {
        [
            "parallax",
            "--target",
            "LPO-P04",
            "--from",
            "2026-03-01",
            "--to",
            "2026-06-01",
        ]
        .iter()
        .chain(extra)
        .map(|s| s.to_string())
        .collect()
    };
    let run = |id: &str, args: Vec<String>, want: &str| {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        check_cli(id, &a, want);
    };
    run(
        "M1",
        p(&["--fraction", "-0.5"]),
        "invalid --fraction: -0.5 is not within 0..1",
    );
    run(
        "M2",
        p(&["--ha-limit-h", "13"]),
        "invalid --ha-limit-h: 13 is not within (0, 12] hours",
    );
    run(
        "M3",
        p(&["--max-airmass", "0.5"]),
        "invalid --max-airmass: 0.5 must be at least 1",
    );
    run(
        "M4",
        p(&["--snr", "-5"]),
        "invalid --snr: -5 must be a positive number",
    );
    run(
        "M5",
        p(&["--goal-pct", "-3"]),
        "invalid --goal-pct: -3 % is not a distance precision in (0, 100] %",
    );
    run(
        "M6",
        p(&["--instrument", "nope-2m"]),
        "invalid --instrument: unknown instrument 'nope-2m'; known instruments: lucero-1m, alcaravan-2m, lucero-1m-ir",
    );
    run(
        "M7",
        vec!["parallax".into(), "--target".into(), "LPO-C04".into()],
        "invalid target 'LPO-C04': has no expected parallax_mas: give one (mas, positive)",
    );
    run(
        "M8",
        vec!["phase".into(), "--target".into(), "LPO-P04".into()],
        "target 'LPO-P04' is a parallax target, not a pulsator; give --period-d and --epoch-max-bjd to treat it as one",
    );
    run(
        "M9",
        vec![
            "phase".into(),
            "--target".into(),
            "LPO-C02".into(),
            "--snr".into(),
            "-5".into(),
        ],
        "invalid --snr: -5 is not a signal-to-noise of at least 2",
    );
    run(
        "M10",
        vec![
            "phase".into(),
            "--target".into(),
            "LPO-C02".into(),
            "--goal-pct".into(),
            "0".into(),
        ],
        "invalid --goal-pct: 0 % is not a distance precision in (0, 100] %",
    );
    run(
        "M11",
        vec!["chase".into(), "--target".into(), "LPO-P04".into()],
        "target LPO-P04 is a parallax target, not a transient",
    );
    let c = |extra: &[&str]| -> Vec<String> {
        [
            "chase",
            "--target",
            "LPO-T2026a",
            "--now",
            "2026-12-01T12:00:00Z",
        ]
        .iter()
        .chain(extra)
        .map(|s| s.to_string())
        .collect()
    };
    run(
        "M12",
        c(&["--bands", "V,R"]),
        "invalid bands: V,R: the chase's first band must be B, the band of the standardization",
    );
    run(
        "M13",
        c(&["--bands", "B,R"]),
        "invalid bands: B,R: the chase needs V with B for the colour that measures the host extinction",
    );
    run(
        "M14",
        c(&["--classification", "II"]),
        "invalid classification: LPO-T2026a is classified as II: the chase plans standardizable thermonuclear supernovae (class Ia) only",
    );
    run(
        "M15",
        c(&["--standardization", "stretch"]),
        "--standardization stretch: give stretch-colour or decline-rate",
    );
    run(
        "M16",
        c(&["--host-mu", "60", "--host-mu-err", "0"]),
        "invalid host_mu_mag: 60 ± 0 is not a host distance modulus (15..45 mag, error 0..5)",
    );
    run(
        "M17",
        vec![
            "chase".into(),
            "--ra".into(),
            "50".into(),
            "--dec".into(),
            "-30".into(),
            "--discovered".into(),
            "2026-11-28T04:00:00Z".into(),
            "--mag".into(),
            "19.5".into(),
            "--redshift".into(),
            "0.5".into(),
            "--now".into(),
            "2026-12-01T12:00:00Z".into(),
        ],
        "invalid redshift: 0.5 of transient is beyond 0.3, where the chase's model stops: without K-corrections from a spectral template the observed bands no longer sample the rest-frame light the template and the standardization are made for (docs/science.md, Thermonuclear supernovae)",
    );
}

/// An instruments file with one invented instrument (as config/instruments.toml).
const INSTRUMENT: &str = "[[instrument]]
name = \"test-1m\"
aperture_m = 1.0
obstruction = 0.33
pixel_scale_arcsec = 0.40
read_noise_e = 6.0
dark_e_per_pix_s = 0.002
gain_e_per_adu = 1.3
full_well_e = 90000.0
linear_fraction = 0.8
seeing_fwhm_arcsec = 1.3
readout_s = 18.0
visit_overhead_s = 120.0
min_exptime_s = 1.0
max_sub_exptime_s = 900.0
sky_annulus_fwhm = [3.0, 5.0]

[instrument.throughput]
V = 0.52
";

#[test]
fn instruments_toml() {
    use rung::photometry::instrument::parse_instruments;
    let p = Path::new("i.toml");
    assert_eq!(
        parse_instruments(INSTRUMENT, p)
            .expect("the good file reads")
            .len(),
        1
    );
    let bad = |from: &str, to: &str| {
        assert!(INSTRUMENT.contains(from), "{from}");
        err(parse_instruments(&INSTRUMENT.replacen(from, to, 1), p))
    };
    for (id, got, want) in [
        (
            "I3",
            bad("aperture_m = 1.0", "aperture_m = -1.0"),
            "i.toml, line 3, field 'aperture_m': instrument test-1m: -1 m is not within 0.01..50 m: from a 1 cm lens to beyond the largest telescope being built (39 m)",
        ),
        (
            "I4",
            bad("V = 0.52", "V = 1.5"),
            "i.toml, line 19, field 'throughput.V': instrument test-1m: 1.5 is not an efficiency in (0, 1]",
        ),
        (
            "I5",
            bad("readout_s", "read_out_s"),
            "i.toml, line 12, field 'read_out_s': unknown field `read_out_s`, expected one of `name`, `description`, `aperture_m`, `obstruction`, `pixel_scale_arcsec`, `read_noise_e`, `dark_e_per_pix_s`, `gain_e_per_adu`, `full_well_e`, `adc_bits`, `linear_fraction`, `seeing_fwhm_arcsec`, `readout_s`, `visit_overhead_s`, `filter_change_s`, `calibration_s_per_night`, `min_exptime_s`, `max_sub_exptime_s`, `sky_annulus_fwhm`, `throughput`, `fov_arcmin`, `spectrograph`",
        ),
        (
            "I6",
            err(parse_instruments(
                &format!(
                    "{INSTRUMENT}\n[instrument.spectrograph]\nname = \"s\"\nresolution = 5.0\nthroughput = 0.15\nslit_width_arcsec = 1.5\nspatial_scale_arcsec = 0.6\ndispersion_angstrom_per_pix = 3.3\nextraction_fwhm = 2.0\nread_noise_e = 4.0\ndark_e_per_pix_s = 0.001\nreadout_s = 30.0\nacquisition_s = 420.0\nmax_sub_exptime_s = 1200.0\n"
                ),
                p,
            )),
            "i.toml, line 23, field 'spectrograph.resolution': instrument test-1m: 5 is not a resolving power within 10..200000",
        ),
        (
            "I7",
            bad(
                "visit_overhead_s = 120.0",
                "visit_overhead_s = 120.0\ncalibration_s_per_night = 20000.0",
            ),
            "i.toml, line 14, field 'calibration_s_per_night': instrument test-1m: 20000 is not within 0..14400 s (at most four hours a night)",
        ),
    ] {
        check(id, got, want.to_string());
    }
}

/// The user's method configuration files are read by the one configuration
/// reader: a bad value is named in the user's file, at its line and key.
#[test]
fn user_method_config() {
    use rung::ladder::parallax::ParallaxConfig;
    use rung::ladder::pulsator::PulsatorConfig;
    let p = Path::new("pulsator.toml");
    let e = err(PulsatorConfig::merged("# mine\n[defaults]\nbins = 1\n", p));
    check(
        "G1",
        e,
        "pulsator.toml, line 3, field 'defaults.bins': must be within 2..200".into(),
    );
    let e = err(PulsatorConfig::merged("[defaults]\nbinz = 12\n", p));
    assert!(
        e.starts_with("pulsator.toml, line 2, field 'defaults.binz': unknown field `binz`"),
        "G2: {e}"
    );
    check(
        "G2",
        e.split(", expected").next().unwrap_or("").to_string(),
        "pulsator.toml, line 2, field 'defaults.binz': unknown field `binz`".into(),
    );
    let d = tempfile::tempdir().unwrap();
    let f = d.path().join("parallax.toml");
    std::fs::write(&f, "# only what I change\nmax_airmass = 0.9\n").unwrap();
    check(
        "G3",
        err(ParallaxConfig::load(Some(&f))),
        format!(
            "{}, line 2, field 'max_airmass': 0.9 must be at least 1",
            f.display()
        ),
    );
    let t = d.path().join("transient.toml");
    std::fs::write(&t, "[cadence]\nlost_nights_tolerated = 2\n").unwrap();
    check(
        "G4",
        err(rung::ladder::transient::TransientConfig::load(Some(&t))),
        format!(
            "{}, line 2, field 'cadence.lost_nights_tolerated': must be 0 or 1",
            t.display()
        ),
    );
}

// ---------------------------------------------------------------------------
// Targets files, second round (docs/bad-input.md, rows TF1–TF13): quotes,
// units in angles, exact names, duplicate columns and fields rung does not read.

/// Problems and warnings of a CSV text, with the targets that loaded.
fn csv_all(text: &str) -> (Vec<String>, Vec<String>, Vec<rung::io::targets::Target>) {
    let l = parse_csv(text, Path::new("t.csv"));
    let s = |v: &[rung::RungError]| v.iter().map(|e| e.to_string()).collect();
    (s(&l.problems), s(&l.warnings), l.targets)
}

/// Standard error of one line, without its line end (which must be there).
fn one_line(e: &str) -> String {
    assert_eq!(e.matches('\n').count(), 1, "one line: {e}");
    e.trim_end_matches('\n').to_string()
}

const NEVER_CLOSED: &str = "the quote opening this field is never closed; the lines after it are read as rows of their own";

#[test]
fn targets_files_second_round() {
    let names = |t: &[rung::io::targets::Target]| -> Vec<String> {
        t.iter().map(|t| t.name.clone()).collect()
    };
    // TF1: an unclosed quote in the last column used to swallow every later row.
    let (p, w, t) = csv_all("name,ra,dec,notes\nA,1,2,\"note\nB,3,4,fine\nC,5,6,\"ok, quoted\"\n");
    check(
        "TF1",
        p.join(" | "),
        format!("t.csv, line 2, field 'notes': {NEVER_CLOSED}"),
    );
    assert!(w.is_empty());
    assert_eq!(names(&t), ["B", "C"], "TF1: the rows after it load");
    assert_eq!(t[1].notes, "ok, quoted");
    // TF2: text after a closing quote.
    let (p, _, t) = csv_all("name,ra,dec,notes\nA,1,2,\"x\"y\nB,3,4,fine\n");
    check("TF2", p.join(" | "), "t.csv, line 2, field 'notes': text follows the closing quote of this field (inside quotes, write a quote as \"\")".into());
    assert_eq!(names(&t), ["B"]);
    // TF3: an RA with degree marks is degrees, hours marks or colons are hours.
    let (p, _, t) =
        csv_all("name,ra,dec\nA,10°30′00″,0\nB,10d30m00s,0\nC,10h30m,0\nD,10:30:00,0\n");
    assert!(p.is_empty(), "TF3: {p:?}");
    let ra: Vec<f64> = t.iter().map(|t| t.ra_deg).collect();
    assert_eq!(ra, [10.5, 10.5, 157.5, 157.5], "TF3");
    // TF4, TF5: mixed units, a declination in hours.
    check("TF4", err(parse_ra_deg("10h30′00″")), "cannot read right ascension from '10h30′00″': hours (h) and degrees (°, d, ′, ″) are mixed in one angle; write hours as 10h30m00s or degrees as 157°30′00″".into());
    check("TF5", err(parse_dec_deg("10h30m")), "cannot read declination from '10h30m': an angle in degrees cannot be written in hours (h); write degrees as -5.39, -5:23:24 or -5°23′24″".into());
    // TF8: a duplicated column.
    let (p, _, t) = csv_all("name,ra,dec,ra\nA,1,2,3\n");
    check("TF8", p.join(" | "), "t.csv, line 1, field 'ra': the header has this column twice (columns 2 and 4): which one to read is unclear, so no row was read".into());
    assert!(t.is_empty());
    // TF9: a misspelt TOML key refuses its table, by name and line.
    let l = parse_toml(
        "[[target]]\nname = \"A\"\nra = 1\ndec = 2\nkind = \"parallax\"\nparalax_mas = 12\n\n[[target]]\nname = \"B\"\nra = 1\ndec = 2\n",
        Path::new("t.toml"),
    );
    check("TF9", l.problems.iter().map(|e| e.to_string()).collect::<Vec<_>>().join(" | "), "t.toml, line 6, field 'paralax_mas': is not a field rung reads; did you mean 'parallax_mas'?".into());
    assert_eq!(names(&l.targets), ["B"]);
    // TF10: a misspelt CSV column refuses the rows that give it a value.
    let (p, w, t) = csv_all("name,ra,dec,pm_ra_masy\nA,1,2,350\nB,3,4,\n");
    check(
        "TF10",
        p.join(" | "),
        "t.csv, line 2, field 'pm_ra_masy': is not a field rung reads; did you mean 'pm_ra_masyr'?"
            .into(),
    );
    assert!(w.is_empty());
    assert_eq!(names(&t), ["B"]);
    // TF11, TF12: a column or key rung does not read at all is named once, and the rows load.
    let (p, w, t) = csv_all("name,ra,dec,observer\nA,1,2,ana\nB,3,4,\n");
    assert!(p.is_empty());
    check("TF11", w.join(" | "), "t.csv, line 1, field 'observer': is not a field rung reads: its values are ignored (a save from the UI keeps them)".into());
    assert_eq!(t.len(), 2);
    let l = parse_toml(
        "[[target]]\nname = \"A\"\nra = 1\ndec = 2\nobserver = \"ana\"\n",
        Path::new("t.toml"),
    );
    assert!(l.problems.is_empty());
    check("TF12", l.warnings.iter().map(|e| e.to_string()).collect::<Vec<_>>().join(" | "), "t.toml, line 5, field 'observer': is not a field rung reads: its values are ignored (a save from the UI keeps them)".into());
    assert_eq!(l.targets.len(), 1);
}

#[test]
fn targets_files_second_round_on_the_command_line() {
    let d = tempfile::tempdir().unwrap();
    let f = d.path().join("t.csv");
    let file = f.display().to_string();
    let at = ["--site", "pampa-lucero", "--at", "2026-12-02T03:00:00Z"];
    let with = |extra: &[&str]| -> Vec<String> {
        let mut a: Vec<String> = ["where"].iter().chain(&at).map(|s| s.to_string()).collect();
        a.extend(["--targets".to_string(), file.clone()]);
        a.extend(extra.iter().map(|s| s.to_string()));
        a
    };
    let run = |a: &[String]| cli(&a.iter().map(|s| s.as_str()).collect::<Vec<_>>());
    // TF6: a name that differs only in case is a hint, not a match.
    std::fs::write(&f, "name,ra,dec\nAlpha,10,-20\n").unwrap();
    let (code, e) = run(&with(&["--target", "alpha"]));
    check(
        "TF6",
        one_line(&e),
        format!(
            "rung: error: {file}: no target named 'alpha'; did you mean 'Alpha'? (names match exactly, case included)"
        ),
    );
    assert_eq!(code, Some(2));
    // TF7: two names differing only in case: the exact one, or neither.
    std::fs::write(&f, "name,ra,dec\nAlpha,10,-20\nALPHA,200,-20\n").unwrap();
    let (code, e) = run(&with(&["--target", "alpha"]));
    check(
        "TF7",
        one_line(&e),
        format!(
            "rung: error: {file}: no target named 'alpha'; names match exactly, case included, and 'Alpha' and 'ALPHA' differ from it only in case"
        ),
    );
    assert_eq!(code, Some(2));
    let (code, e) = run(&with(&["--target", "ALPHA", "--json"]));
    assert_eq!(
        (code, e.as_str()),
        (Some(0), ""),
        "TF7: the exact name is taken"
    );
    // TF13: the unclosed quote of TF1 on the command line: the good rows are
    // used, the refused row is named, and the exit code is 3.
    std::fs::write(
        &f,
        "name,ra,dec,notes\nA,1,2,\"note\nB,3,4,fine\nC,5,6,ok\n",
    )
    .unwrap();
    let (code, e) = run(&with(&["--target", "C"]));
    check(
        "TF13",
        one_line(&e),
        format!("rung: warning: {file}, line 2, field 'notes': {NEVER_CLOSED} (row skipped)"),
    );
    assert_eq!(code, Some(3));
}

/// C16: a file of many bad rows prints the first 50 and one line counting
/// the rest (200 MB of garbage behind a good header used to print 1.5 million
/// lines), and the good rows are still used.
#[test]
fn a_flood_of_bad_rows_prints_fifty_and_a_count() {
    let d = tempfile::tempdir().unwrap();
    let f = d.path().join("t.csv");
    let file = f.display().to_string();
    let mut text = String::from("name,ra,dec\nFirst,10,-20\n");
    for i in 0..1250 {
        text.push_str(&format!("x{i},nowhere\n"));
    }
    text.push_str("Last,200,-20\n");
    std::fs::write(&f, text).unwrap();
    let (code, e) = cli(&[
        "season",
        "--site",
        "pampa-lucero",
        "--targets",
        &file,
        "--from",
        "2026-12-01",
        "--to",
        "2026-12-01",
        "--summary",
        "--csv",
    ]);
    let lines: Vec<&str> = e.lines().collect();
    assert_eq!(lines.len(), 51, "{e}");
    assert_eq!(
        lines[0],
        format!(
            "rung: warning: {file}, line 3: row has 2 fields but the header has 3 (row skipped)"
        )
    );
    assert_eq!(
        lines[49],
        format!(
            "rung: warning: {file}, line 52: row has 2 fields but the header has 3 (row skipped)"
        )
    );
    check(
        "C16",
        lines[50].to_string(),
        "rung: warning: and 1,200 more rows skipped (not shown: only the first 50 are printed)"
            .into(),
    );
    assert_eq!(code, Some(3), "the good rows were used, some were refused");
}

/// `rung phase --nights N` whose last night lies past the calendar's end
/// panicked (`NaiveDate + Days` out of range), and one past 2099 was taken
/// (a note said only the first 400 nights were planned) where a `--to`
/// there is refused: both refused now, naming the option (bad-input D6).
#[test]
fn phase_nights_past_the_valid_span_are_refused() {
    for n in ["100000", "4000000000"] {
        check_cli(
            "D6",
            &[
                "phase",
                "--target",
                "LPO-C05",
                "--from",
                "2026-12-01",
                "--nights",
                n,
            ],
            &format!(
                "--nights {n} from 2026-12-01 ends past rung's valid span (1960-01-01 to 2099-12-31): give fewer nights"
            ),
        );
    }
}
