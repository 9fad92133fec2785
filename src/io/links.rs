//! Links between the targets of a programme, checked once the whole file is
//! read: a transient's `host` names the target (a field, or a pulsator
//! standing for one) whose distance calibrates it. A link to a target that
//! is not in the file, or to itself, is named with its file, line and field
//! as a warning when the file is read (the row still loads: its other uses,
//! such as the chase, do not need the link, and a save from the UI keeps it
//! as written), and is an error of the distance ladder, which cannot close
//! through it ([`check`]).
//!
//! The rows of the distance ladder that links build are `crate::ladder::chain`'s.

use crate::error::{Location, RungError};
use crate::io::kinds::Target;
use std::collections::HashSet;
use std::path::Path;

/// The link columns: (field, what it must name).
pub const LINK_FIELDS: &[&str] = &["host"];

/// The links of one target that name no target of `names`, as (field, what is wrong).
pub fn dangling(t: &Target, names: &HashSet<&str>) -> Vec<(String, String)> {
    let mut out = Vec::new();
    if !t.host.is_empty() {
        if t.host == t.name {
            out.push((
                "host".to_string(),
                format!(
                    "'{}' names the target itself: a host is the field whose distance calibrates it",
                    crate::io::kinds::cut(&t.host)
                ),
            ));
        } else if !names.contains(t.host.as_str()) {
            out.push((
                "host".to_string(),
                format!(
                    "'{}' is not a target in this file: a host names a field of the programme",
                    crate::io::kinds::cut(&t.host)
                ),
            ));
        }
    }
    out
}

/// Every link of `targets` that names no target of the same list, each as
/// an error with the file, the target's line (found by [`line_of`] in
/// `text`, or in the file when no text is given and it can be read) and the
/// field. Empty when every link holds.
pub fn check(targets: &[Target], file: &Path, text: Option<&str>) -> Vec<RungError> {
    let names: HashSet<&str> = targets.iter().map(|t| t.name.as_str()).collect();
    let bad: Vec<(&Target, String, String)> = targets
        .iter()
        .flat_map(|t| dangling(t, &names).into_iter().map(move |(f, m)| (t, f, m)))
        .collect();
    if bad.is_empty() {
        return Vec::new();
    }
    let owned;
    let text = match text {
        Some(t) => Some(t),
        None => {
            owned = std::fs::read_to_string(file).ok();
            owned.as_deref()
        }
    };
    bad.into_iter()
        .map(|(t, field, msg)| RungError::InFile {
            loc: Location {
                file: Some(file.to_path_buf()),
                line: text.and_then(|x| line_of(x, file, &t.name)),
                field: Some(field),
            },
            msg,
        })
        .collect()
}

/// The 1-based line where the target `name` is written in a targets file's
/// text (CSV: the row whose `name` field is `name`; TOML: the `[[target]]`
/// header of the table whose `name` is `name`); `None` when it cannot be told.
pub fn line_of(text: &str, file: &Path, name: &str) -> Option<usize> {
    if file
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("toml"))
    {
        let doc: toml::Table = text.parse().ok()?;
        let list = doc.get("target")?.as_array()?;
        let lines = array_table_lines(text, "target", list.len());
        let i = list
            .iter()
            .position(|t| t.get("name").and_then(|v| v.as_str()) == Some(name))?;
        return lines.get(i).copied().filter(|l| *l > 0);
    }
    use crate::io::csv_text::{Event, Record, Records};
    let mut recs = Records::new(text.as_bytes());
    let mut rec = Record::default();
    let mut name_col = None;
    while let Ok(Some(ev)) = recs.next_into(&mut rec) {
        if !matches!(ev, Event::Record) {
            continue;
        }
        match name_col {
            None => {
                name_col = (0..rec.len())
                    .find(|&i| rec.value(i).is_ok_and(|v| v.eq_ignore_ascii_case("name")));
                name_col?;
            }
            Some(c) if c < rec.len() && rec.value(c).is_ok_and(|v| v == name) => {
                return Some(rec.line);
            }
            Some(_) => {}
        }
    }
    None
}

/// The 1-based lines of the `[[name]]` headers of a TOML text, one per
/// table of the array (spaces inside the brackets, quoted names and trailing
/// comments allowed). When they cannot be matched one to one with the
/// `count` tables (tables written inline, or a header-like line inside a
/// multi-line string), all are 0, "line not known", rather than wrong.
pub(crate) fn array_table_lines(text: &str, name: &str, count: usize) -> Vec<usize> {
    let lines: Vec<usize> = text
        .lines()
        .enumerate()
        .filter(|(_, l)| {
            let t = l.trim();
            t.strip_prefix("[[")
                .and_then(|r| r.split_once("]]"))
                .is_some_and(|(inner, rest)| {
                    let inner = inner.trim();
                    let rest = rest.trim_start();
                    (inner == name || inner.trim_matches(['"', '\'']) == name)
                        && (rest.is_empty() || rest.starts_with('#'))
                })
        })
        .map(|(i, _)| i + 1)
        .collect();
    if lines.len() == count {
        lines
    } else {
        vec![0; count]
    }
}
