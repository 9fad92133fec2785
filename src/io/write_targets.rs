//! Targets back to CSV: the inverse of [`crate::io::targets::parse_csv`], and a
//! save that keeps what the user wrote.
//!
//! A target read with [`crate::io::targets::load_keeping`] carries how each
//! field was written and the row it came from. [`to_csv`] then writes the
//! file back as it was (comments, blank lines, column order, refused rows,
//! columns rung does not read, quoting) and changes only the fields whose
//! value changed: an unchanged `04:05:12.0` stays sexagesimal, an unchanged
//! `61.3` stays `61.3`. Removed targets lose their row; new ones are added at
//! the end; a column a new value needs is added to the header.
//!
//! A value without its written text is written in a form that reads back to
//! the same number bit for bit (Rust's shortest round-trip formatting), and a
//! discovery instant as ISO 8601 UTC (to the microsecond when not whole
//! seconds).

use crate::astro::time::Instant;
use crate::io::csv_text::{Item, Layout, quote, unquote};
use crate::io::kinds::{COLUMNS, Cell, Column, Target, column, read_cell};
use std::sync::Arc;

/// ISO 8601 UTC text of an instant that reads back to the same instant (to 1 µs).
pub fn instant_text(t: &Instant) -> String {
    let r = t.round_to_second();
    if r.seconds_since(t).abs() < 1e-6 {
        r.iso()
    } else {
        t.to_datetime().format("%Y-%m-%dT%H:%M:%S%.6fZ").to_string()
    }
}

/// The text of a value as a new file writes it.
pub fn cell_text(c: &Cell) -> String {
    match c {
        Cell::Empty => String::new(),
        Cell::Num(x) => format!("{x}"),
        Cell::Text(s) => s.clone(),
        Cell::Time(t) => instant_text(t),
        Cell::Kind(k) => k.as_str().to_string(),
    }
}

/// Whether `written` reads back to the value the target has in field `c`.
fn still_reads(c: &Column, written: &str, t: &Target) -> bool {
    read_cell(c, written).is_ok_and(|v| v == (c.get)(t))
}

/// The text of one field of a target (empty when unset): as it was written
/// when that still reads back to the target's value, else the value's own
/// text. A default the target's kind does not use is left empty. A field
/// rung does not read gives its text as written.
pub fn field_text(t: &Target, key: &str) -> String {
    let Some(c) = column(key) else {
        return t.written.text(key).unwrap_or("").to_string();
    };
    if let Some(w) = t.written.text(key)
        && still_reads(c, w, t)
    {
        return w.to_string();
    }
    if !t.kind.uses(key) && is_default(c, t) {
        return String::new();
    }
    cell_text(&(c.get)(t))
}

/// Whether a target's value of field `c` is what an empty field reads as.
fn is_default(c: &Column, t: &Target) -> bool {
    read_cell(c, "").is_ok_and(|d| d == (c.get)(t))
}

/// The text of field `key` in a column added to a file: empty when the value
/// is what an empty field reads as.
fn added_text(t: &Target, key: &str) -> String {
    match column(key) {
        Some(c) if is_default(c, t) => String::new(),
        _ => field_text(t, key),
    }
}

/// Columns beyond `have` that some target needs: fields of the table whose
/// value is not what an empty field reads as, then fields rung does not read,
/// in the order first met.
fn more_columns(targets: &[Target], have: &[String]) -> Vec<String> {
    let mut more: Vec<String> = COLUMNS
        .iter()
        .filter(|c| !have.iter().any(|h| h == c.key))
        .filter(|c| targets.iter().any(|t| !is_default(c, t)))
        .map(|c| c.key.to_string())
        .collect();
    for t in targets {
        let Some(w) = &t.written.0 else { continue };
        for (k, v) in &w.fields {
            if column(k).is_none() && !v.is_empty() && !have.contains(k) && !more.contains(k) {
                more.push(k.clone());
            }
        }
    }
    more
}

fn push_row(out: &mut String, fields: impl Iterator<Item = String>, newline: &str) {
    for (i, f) in fields.enumerate() {
        if i > 0 {
            out.push(',');
        }
        out.push_str(&quote(&f, i == 0));
    }
    out.push_str(newline);
}

/// CSV text of a programme that `parse_csv` reads back to the same targets
/// (discovery instants to 1 µs). Targets read with their layout
/// ([`crate::io::targets::load_keeping`]) are written into it (see the module
/// text); otherwise the header lists every field of the table.
pub fn to_csv(targets: &[Target]) -> String {
    to_csv_in(layout_of(targets).as_ref(), targets)
}

/// The layout of the file the first of `targets` read with one came from.
pub fn layout_of(targets: &[Target]) -> Option<Arc<Layout>> {
    targets
        .iter()
        .find_map(|t| t.written.row().map(|r| r.layout.clone()))
}

/// [`to_csv`] into a given layout (that of the file the programme was read
/// from, kept even when every target read from it has been removed).
pub fn to_csv_in(layout: Option<&Arc<Layout>>, targets: &[Target]) -> String {
    match layout {
        Some(l) => into_layout(l, targets),
        None => {
            let mut cols: Vec<String> = COLUMNS.iter().map(|c| c.key.to_string()).collect();
            cols.extend(more_columns(targets, &cols));
            let mut out = String::new();
            push_row(&mut out, cols.iter().cloned(), "\n");
            for t in targets {
                push_row(&mut out, cols.iter().map(|c| field_text(t, c)), "\n");
            }
            out
        }
    }
}

fn into_layout(l: &Arc<Layout>, targets: &[Target]) -> String {
    let more = more_columns(targets, &l.columns);
    let mut out = String::with_capacity(l.text.len() + 256);
    // Which target holds which row of the layout (the first one to claim it).
    let mut at_row = std::collections::HashMap::new();
    for (i, t) in targets.iter().enumerate() {
        if let Some(r) = t.written.row()
            && Arc::ptr_eq(&r.layout, l)
        {
            at_row.entry(r.item).or_insert(i);
        }
    }
    let mut placed = vec![false; targets.len()];
    let line_ended = |out: &mut String| {
        if !out.is_empty() && !out.ends_with('\n') {
            out.push_str(&l.newline);
        }
    };
    for (idx, item) in l.items.iter().enumerate() {
        match item {
            Item::Verbatim(r) => {
                line_ended(&mut out);
                out.push_str(l.at(r));
            }
            Item::Header(content, term) => {
                line_ended(&mut out);
                out.push_str(l.at(content));
                for m in &more {
                    out.push(',');
                    out.push_str(&quote(m, false));
                }
                out.push_str(if term.is_empty() && !more.is_empty() {
                    &l.newline
                } else {
                    l.at(term)
                });
            }
            Item::Row {
                content,
                terminator,
                fields,
            } => {
                let Some(&i) = at_row.get(&idx) else {
                    continue; // removed
                };
                placed[i] = true;
                let t = &targets[i];
                line_ended(&mut out);
                let texts: Vec<String> = fields
                    .iter()
                    .enumerate()
                    .map(|(j, raw)| {
                        let key = l.columns.get(j).map_or("", |s| s.as_str());
                        match column(key) {
                            Some(c) if !still_reads(c, &unquote(l.at(raw)), t) => {
                                quote(&field_text(t, key), j == 0)
                            }
                            _ => l.at(raw).to_string(),
                        }
                    })
                    .collect();
                let same = texts
                    .iter()
                    .zip(fields)
                    .all(|(x, raw)| x.as_str() == l.at(raw));
                if same && more.is_empty() {
                    out.push_str(l.at(content));
                } else {
                    out.push_str(&texts.join(","));
                    for m in &more {
                        out.push(',');
                        out.push_str(&quote(&added_text(t, m), false));
                    }
                }
                out.push_str(l.at(terminator));
            }
        }
    }
    for (t, _) in targets.iter().zip(&placed).filter(|(_, p)| !**p) {
        line_ended(&mut out);
        let texts = l.columns.iter().map(|c| field_text(t, c));
        let added = more.iter().map(|c| added_text(t, c));
        push_row(&mut out, texts.chain(added), &l.newline);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::kinds::Kind;
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
        assert_eq!(first.targets.len(), 71);
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

    const WRITTEN: &str = "# my programme\r\n# (comments stay)\r\nname,kind,ra,dec,parallax_mas,notes,observer\r\nA,parallax,10:00:00,-20:00:00,61.3,\"quoted, note\",ana\r\n\r\n  B , plain, 150.0 ,-5,,x,\r\nbad,parallax,1,2,,,\r\nC,plain,1,2,,,bo";

    fn keeping() -> Vec<Target> {
        let l = crate::io::targets::parse_csv_keeping(WRITTEN, Path::new("p.csv"));
        assert_eq!(l.problems.len(), 1, "{:?}", l.problems);
        assert_eq!(l.warnings.len(), 1, "{:?}", l.warnings);
        l.targets
    }

    /// The lines of `b` that differ from those of `a` (same number of lines).
    fn changed(a: &str, b: &str) -> Vec<(String, String)> {
        assert_eq!(a.lines().count(), b.lines().count(), "{b}");
        a.lines()
            .zip(b.lines())
            .filter(|(x, y)| x != y)
            .map(|(x, y)| (x.to_string(), y.to_string()))
            .collect()
    }

    #[test]
    fn an_unchanged_programme_is_written_back_byte_for_byte() {
        assert_eq!(to_csv(&keeping()), WRITTEN);
    }

    #[test]
    fn an_edit_changes_its_field_only() {
        let mut ts = keeping();
        ts[0].parallax_mas = Some(62.5);
        let out = to_csv(&ts);
        assert_eq!(
            changed(WRITTEN, &out),
            [(
                "A,parallax,10:00:00,-20:00:00,61.3,\"quoted, note\",ana".to_string(),
                "A,parallax,10:00:00,-20:00:00,62.5,\"quoted, note\",ana".to_string()
            )]
        );
        assert!(out.contains("\r\n# (comments stay)\r\n"));
        // A value set to what its text already says keeps the text.
        let mut ts = keeping();
        ts[1].ra_deg = 150.0;
        assert_eq!(to_csv(&ts), WRITTEN);
    }

    #[test]
    fn removed_rows_go_new_ones_come_last_and_a_needed_column_is_added() {
        let mut ts = keeping();
        ts.remove(2); // C
        let out = to_csv(&ts);
        assert_eq!(out, WRITTEN.replace("C,plain,1,2,,,bo", ""));
        let mut t = Target::plain("D", 0.1 + 0.2, 5.0);
        t.kind = crate::io::kinds::Kind::Pulsator;
        t.period_d = Some(3.5);
        t.epoch_max_bjd = Some(2461000.5);
        ts.push(t);
        let out = to_csv(&ts);
        let back = parse_csv(&out, Path::new("p.csv"));
        assert_eq!(back.targets.len(), 3, "{out}");
        assert_eq!(back.targets[2].ra_deg, 0.1 + 0.2);
        assert_eq!(back.targets[2].period_d, Some(3.5));
        let lines: Vec<&str> = out.lines().collect();
        assert_eq!(
            lines[2],
            "name,kind,ra,dec,parallax_mas,notes,observer,period_d,epoch_max_bjd"
        );
        assert_eq!(
            lines[3],
            "A,parallax,10:00:00,-20:00:00,61.3,\"quoted, note\",ana,,"
        );
        assert_eq!(
            lines[6], "bad,parallax,1,2,,,",
            "a refused row stays as it was"
        );
        assert_eq!(
            lines[7],
            "D,pulsator,0.30000000000000004,5,,,,3.5,2461000.5"
        );
        assert!(out.ends_with("\r\n"), "new rows take the header's line end");
    }
}
