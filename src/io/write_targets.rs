//! Targets back to CSV: the inverse of [`crate::io::targets::parse_csv`].
//!
//! One header row with every column the reader knows, one row per target.
//! Angles are written as decimal degrees with Rust's shortest round-trip
//! formatting, so reading the text back gives the same numbers bit for bit;
//! discovery instants are ISO 8601 UTC (to the microsecond when not whole seconds).

use crate::astro::time::Instant;
use crate::io::targets::{Kind, Target};

/// The columns written, in order (all are read by `parse_csv`).
pub const COLUMNS: [&str; 23] = [
    "name",
    "kind",
    "ra",
    "dec",
    "parallax_mas",
    "pm_ra_masyr",
    "pm_dec_masyr",
    "epoch_yr",
    "mag",
    "band",
    "period_d",
    "epoch_max_bjd",
    "period_err_d",
    "amplitude_mag",
    "mean_mag",
    "discovered",
    "peak_mag",
    "mag_now",
    "redshift",
    "extinction_mag",
    "goal_pct",
    "priority",
    "notes",
];

fn num(v: Option<f64>) -> String {
    v.map(|x| format!("{x}")).unwrap_or_default()
}

/// ISO 8601 UTC text of an instant that reads back to the same instant (to 1 µs).
pub fn instant_text(t: &Instant) -> String {
    let r = t.round_to_second();
    if r.seconds_since(t).abs() < 1e-6 {
        r.iso()
    } else {
        t.to_datetime().format("%Y-%m-%dT%H:%M:%S%.6fZ").to_string()
    }
}

/// The text of one field of a target as the CSV reader expects it (empty when unset).
pub fn field_text(t: &Target, column: &str) -> String {
    match column {
        "name" => t.name.clone(),
        "kind" => t.kind.as_str().to_string(),
        "ra" => format!("{}", t.ra_deg),
        "dec" => format!("{}", t.dec_deg),
        "parallax_mas" => num(t.parallax_mas),
        "pm_ra_masyr" => format!("{}", t.pm_ra_masyr),
        "pm_dec_masyr" => format!("{}", t.pm_dec_masyr),
        "epoch_yr" => format!("{}", t.epoch_yr),
        "mag" => num(t.mag),
        "band" => t.band.clone(),
        "period_d" => num(t.period_d),
        "epoch_max_bjd" => num(t.epoch_max_bjd),
        "period_err_d" => num(t.period_err_d),
        "amplitude_mag" => num(t.amplitude_mag),
        "mean_mag" => num(t.mean_mag),
        "discovered" => t.discovered.map(|d| instant_text(&d)).unwrap_or_default(),
        "peak_mag" => num(t.peak_mag),
        "mag_now" => num(t.mag_now),
        "redshift" => num(t.redshift),
        "extinction_mag" => format!("{}", t.extinction_mag),
        "goal_pct" => num(t.goal_pct),
        "priority" => format!("{}", t.priority),
        "notes" => t.notes.clone(),
        _ => String::new(),
    }
}

/// CSV text of a programme, with a header row, that `parse_csv` reads back to
/// the same targets (discovery instants to 1 µs).
pub fn to_csv(targets: &[Target]) -> String {
    let mut w = csv::WriterBuilder::new()
        .quote_style(csv::QuoteStyle::Necessary)
        .from_writer(Vec::new());
    // Writing to a Vec cannot fail.
    let _ = w.write_record(COLUMNS);
    for t in targets {
        let row: Vec<String> = COLUMNS.iter().map(|c| field_text(t, c)).collect();
        let _ = w.write_record(&row);
    }
    let bytes = w.into_inner().unwrap_or_default();
    let mut s = String::from_utf8(bytes).unwrap_or_default();
    // A name starting with '#' would read back as a comment line: quote it.
    if targets.iter().any(|t| t.name.starts_with('#')) {
        s = s
            .lines()
            .map(|l| {
                if l.starts_with('#') {
                    let (first, rest) = l.split_once(',').unwrap_or((l, ""));
                    format!("\"{}\",{rest}", first.replace('"', "\"\""))
                } else {
                    l.to_string()
                }
            })
            .collect::<Vec<_>>()
            .join("\n")
            + "\n";
    }
    s
}

/// Whether a kind uses a column (the form shows only these).
pub fn kind_uses(kind: Kind, column: &str) -> bool {
    match column {
        "name" | "kind" | "ra" | "dec" | "band" | "goal_pct" | "priority" | "notes" => true,
        "parallax_mas" | "pm_ra_masyr" | "pm_dec_masyr" | "epoch_yr" => kind == Kind::Parallax,
        "mag" => matches!(kind, Kind::Parallax | Kind::Plain),
        "period_d" | "epoch_max_bjd" | "period_err_d" | "amplitude_mag" | "mean_mag" => {
            kind == Kind::Pulsator
        }
        "discovered" | "peak_mag" | "mag_now" | "redshift" => kind == Kind::Transient,
        "extinction_mag" => matches!(kind, Kind::Pulsator | Kind::Transient),
        _ => false,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::targets::parse_csv;
    use std::path::Path;

    fn same(a: &Target, b: &Target) {
        let mut a2 = a.clone();
        let mut b2 = b.clone();
        match (a.discovered, b.discovered) {
            (Some(x), Some(y)) => assert!(x.seconds_since(&y).abs() < 1e-3, "{}", a.name),
            (None, None) => {}
            _ => panic!("discovered differs for {}", a.name),
        }
        a2.discovered = None;
        b2.discovered = None;
        assert_eq!(a2, b2);
    }

    #[test]
    fn demo_programme_round_trips() {
        let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
        let text = std::fs::read_to_string(&p).unwrap();
        let first = parse_csv(&text, &p);
        assert!(first.problems.is_empty());
        assert_eq!(first.targets.len(), 26);
        let again = parse_csv(&to_csv(&first.targets), Path::new("x.csv"));
        assert!(again.problems.is_empty(), "{:?}", again.problems);
        assert_eq!(again.targets.len(), first.targets.len());
        for (a, b) in first.targets.iter().zip(&again.targets) {
            same(a, b);
        }
    }

    #[test]
    fn awkward_text_round_trips() {
        let mut t = Target::plain("#odd, \"quoted\" name", 123.456_789_012_345_67, -0.000001);
        t.notes = "commas, quotes \" and\nnewlines".into();
        t.priority = 2.5;
        t.mag = Some(12.3);
        let mut u = Target::plain("T1", 0.1 + 0.2, 89.999999);
        u.kind = Kind::Transient;
        u.discovered = Some(Instant::from_utc_calendar(2026, 11, 28, 6, 10, 7.25).unwrap());
        u.peak_mag = Some(16.0);
        let list = vec![t, u];
        let back = parse_csv(&to_csv(&list), Path::new("x.csv"));
        assert!(back.problems.is_empty(), "{:?}", back.problems);
        assert_eq!(back.targets.len(), 2);
        for (a, b) in list.iter().zip(&back.targets) {
            same(a, b);
        }
    }
}
