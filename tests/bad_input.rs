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
        ("S3", s("[[site]]\nname = \"a\"\nlat_deg = 95\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\n"), "s.toml, line 1, field 'lat_deg': 95 is not within -90..+90 degrees".into()),
        ("S4", s("[[site]]\nname = \"a\nlat_deg = 10\n"), "s.toml, line 2: invalid basic string, expected `\"`".into()),
        ("S5", s("[[site]]\nname = \"a\"\nlattitude = 10\n"), "s.toml, line 2: unknown field `lattitude`, expected one of `name`, `lat_deg`, `lon_deg`, `elev_m`, `timezone`, `pressure_hpa`, `temperature_c`, `humidity`, `sun_avoid_deg`, `horizon`, `description`".into()),
        ("S6", s("[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"Mars/Olympus\"\n"), "s.toml, line 1, field 'timezone': 'Mars/Olympus' is not an IANA time zone".into()),
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
            "t.csv, line 2, field 'kind': 'quasar' is not one of parallax, pulsator, transient, plain",
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
            "t.csv, line 2: row has 1 fields but the header has 3",
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
    assert!(e.starts_with("s.toml, line 1, field 'lat_deg'"), "{e}");
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
