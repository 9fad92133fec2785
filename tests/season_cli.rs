//! `rung season` from the outside: bad input gets one clear line and a
//! non-zero exit; good input gives the contracted columns and keys.

use std::io::Write;
use std::process::{Command, Output};

fn rung(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .output()
        .expect("run rung")
}

fn targets_file(rows: &[(&str, f64, f64)]) -> tempfile::NamedTempFile {
    let mut f = tempfile::Builder::new().suffix(".csv").tempfile().unwrap();
    writeln!(f, "name,kind,ra,dec").unwrap();
    for (n, ra, dec) in rows {
        writeln!(f, "{n},plain,{ra},{dec}").unwrap();
    }
    f
}

fn base<'a>(targets: &'a str, from: &'a str, to: &'a str) -> Vec<&'a str> {
    vec![
        "season",
        "--site",
        "pampa-lucero",
        "--targets",
        targets,
        "--from",
        from,
        "--to",
        to,
        "--min-alt",
        "30",
        "--sun-alt",
        "-18",
    ]
}

fn one_line_error(o: &Output, needle: &str) {
    assert!(!o.status.success(), "should fail");
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(err.trim_end().lines().count(), 1, "one line: {err}");
    assert!(err.contains(needle), "{err}");
}

#[test]
fn bad_ranges_and_catalogues_are_refused_in_one_line() {
    let f = targets_file(&[("INV-A", 10.0, -30.0)]);
    let p = f.path().to_str().unwrap();
    one_line_error(&rung(&base(p, "2026-05-02", "2026-05-01")), "is after --to");
    // rung's valid span ends in 2099 (SOFA epv00 covers 1900-2100).
    one_line_error(&rung(&base(p, "2099-12-01", "2100-01-10")), "valid span");
    one_line_error(&rung(&base(p, "1959-12-20", "1960-01-10")), "valid span");
    one_line_error(
        &rung(&base(p, "2026-01-01", "2037-01-01")),
        "at most 3653 nights",
    );
    one_line_error(&rung(&base(p, "2026-13-01", "2027-01-01")), "YYYY-MM-DD");
    let empty = targets_file(&[]);
    let e = empty.path().to_str().unwrap();
    one_line_error(
        &rung(&base(e, "2026-05-01", "2026-05-02")),
        "no usable targets",
    );
    let mut a = base(p, "2026-05-01", "2026-05-02");
    a.extend(["--moon-sep", "200"]);
    one_line_error(&rung(&a), "--moon-sep");
}

#[test]
fn csv_rows_json_rows_and_summary_agree() {
    let f = targets_file(&[
        ("INV-A", 10.0, -30.0),
        ("INV-B", 200.0, -60.0),
        ("INV-C", 100.0, 75.0), // never rises at 27°S above 30°
    ]);
    let p = f.path().to_str().unwrap();
    let mut a = base(p, "2026-05-01", "2026-05-10");
    a.extend(["--moon-sep", "20", "--csv"]);
    let o = rung(&a);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8(o.stdout).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    // DESIGN.md contract: these five columns first.
    assert!(
        header.starts_with("target,night,observable_hours,best_airmass,moon_separation_min_deg")
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 3 * 10);
    let mut total_a = 0.0;
    for r in &rows {
        let h: f64 = r[2].parse().unwrap();
        assert!((0.0..=14.0).contains(&h), "hours {h}");
        if r[0] == "INV-C" {
            assert_eq!(h, 0.0);
            assert_eq!(r[3], "");
        }
        if r[0] == "INV-A" {
            total_a += h;
        }
        if h > 0.0 {
            let sep: f64 = r[4].parse().unwrap();
            assert!(sep >= 20.0 - 0.01, "Moon limit 20°, got {sep}");
            let x: f64 = r[3].parse().unwrap();
            assert!(
                (1.0..=2.0).contains(&x),
                "above 30° the airmass is at most 2 (Kasten & Young 1989)"
            );
        }
    }

    let mut j = base(p, "2026-05-01", "2026-05-10");
    j.extend(["--moon-sep", "20", "--json"]);
    let o = rung(&j);
    assert!(o.status.success());
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let jr = v["rows"].as_array().unwrap();
    assert_eq!(jr.len(), 30);
    for k in [
        "target",
        "night",
        "observable_hours",
        "best_airmass",
        "moon_separation_min_deg",
        "transit",
        "window_start",
        "window_end",
    ] {
        assert!(jr[0].get(k).is_some(), "missing key {k}");
    }
    assert_eq!(v["min_alt_deg"], 30.0);

    let mut s = base(p, "2026-05-01", "2026-05-10");
    s.extend(["--moon-sep", "20", "--json", "--summary"]);
    let o = rung(&s);
    assert!(o.status.success());
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let sa = &v["summary"][0];
    assert_eq!(sa["target"], "INV-A");
    let th = sa["total_hours"].as_f64().unwrap();
    assert!((th - total_a).abs() < 0.01, "{th} vs {total_a}");
    assert_eq!(v["summary"][2]["nights_observable"], 0);
    assert!(v["summary"][2]["first_night"].is_null());
    assert_eq!(sa["best_month"], "2026-05");
}

#[test]
fn no_progress_bar_when_stderr_is_not_a_terminal() {
    // 1000 targets × 100 nights: a run long enough for the progress bar, but
    // stderr is a pipe here, so it must stay silent.
    let rows: Vec<(String, f64, f64)> = (0..1000)
        .map(|i| {
            (
                format!("INV-{i:04}"),
                (i as f64 * 7.3) % 360.0,
                -80.0 + (i as f64 * 0.16),
            )
        })
        .collect();
    let refs: Vec<(&str, f64, f64)> = rows.iter().map(|(n, a, b)| (n.as_str(), *a, *b)).collect();
    let f = targets_file(&refs);
    let p = f.path().to_str().unwrap();
    let mut a = base(p, "2026-01-01", "2026-04-10");
    a.push("--csv");
    let o = rung(&a);
    assert!(o.status.success());
    assert!(
        o.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert_eq!(
        o.stdout.iter().filter(|b| **b == b'\n').count(),
        1 + 1000 * 100
    );
}
