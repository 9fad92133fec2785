//! Two sessions on one programme: a three-way merge of target lists by name,
//! and the unsaved-edits (recovery) file that carries what a merge needs.
//!
//! Each session remembers the list as it last read or wrote the file (the
//! *base*). When it saves and finds the file changed by someone else (the
//! *theirs*), its own list (the *mine*) is merged target by target: a target
//! only one side changed takes that side's version, one both changed alike
//! takes it, and one both changed differently is a conflict that is never
//! settled silently (the UI asks). Added and removed targets count as changes.
//!
//! The recovery file is the programme as the session has it (a targets CSV
//! any reader loads), preceded by comment lines that record the base it was
//! edited from: the fingerprint of the file's bytes then, and the base rows of
//! every target the session changed, added (no row) or removed, so that edits
//! restored after a crash merge with whatever was saved since instead of
//! undoing it.

use crate::io::kinds::COLUMNS;
use crate::io::targets::{Target, parse_csv, parse_csv_keeping};
use crate::io::write_targets::{cell_text, to_csv_in};
use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

/// Fingerprint of a file's bytes (FNV-1a, 64 bit): whether the file is still
/// the one a session read. Not a security measure.
pub fn bytes_fingerprint(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in bytes {
        h ^= u64::from(*b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// A target's values as text, field by field (as a new file writes them):
/// two targets are the same when these are, however their values were
/// written or typed.
fn row_key(t: &Target) -> String {
    COLUMNS
        .iter()
        .map(|c| cell_text(&(c.get)(t)))
        .collect::<Vec<_>>()
        .join("\u{1f}")
}

/// The outcome of [`merge3`].
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Merged {
    /// The merged list: theirs' order, then targets only mine has, in mine's order.
    pub targets: Vec<Target>,
    /// Names both sides changed differently (left as theirs in `targets`).
    pub conflicts: Vec<String>,
    /// Names the other side changed (added, edited or removed) that mine did not.
    pub theirs_changed: Vec<String>,
}

/// Merge two edits of one base list of targets, by name (see the module notes).
pub fn merge3(base: &[Target], theirs: &[Target], mine: &[Target]) -> Merged {
    let index = |l: &[Target]| -> BTreeMap<String, String> {
        l.iter().map(|t| (t.name.clone(), row_key(t))).collect()
    };
    let (b, t, m) = (index(base), index(theirs), index(mine));
    let mut out = Merged::default();
    // What each name becomes: Some(take mine?) or None (removed).
    let mut take_mine: BTreeMap<&str, bool> = BTreeMap::new();
    let mut removed: BTreeSet<&str> = BTreeSet::new();
    let names: BTreeSet<&str> = b
        .keys()
        .chain(t.keys())
        .chain(m.keys())
        .map(String::as_str)
        .collect();
    for n in &names {
        let (bb, tt, mm) = (b.get(*n), t.get(*n), m.get(*n));
        if mm == bb {
            if tt != bb {
                out.theirs_changed.push(n.to_string());
            }
            match tt {
                Some(_) => {
                    take_mine.insert(n, false);
                }
                None => {
                    removed.insert(n);
                }
            }
        } else if tt == bb || tt == mm {
            match mm {
                Some(_) => {
                    take_mine.insert(n, true);
                }
                None => {
                    removed.insert(n);
                }
            }
        } else {
            out.conflicts.push(n.to_string());
            if tt.is_some() {
                take_mine.insert(n, false);
            }
        }
    }
    for x in theirs {
        match take_mine.get(x.name.as_str()) {
            Some(false) => out.targets.push(x.clone()),
            Some(true) => {
                if let Some(y) = mine.iter().find(|y| y.name == x.name) {
                    out.targets.push(y.clone());
                }
            }
            None => {}
        }
    }
    for y in mine {
        if !t.contains_key(&y.name) && take_mine.get(y.name.as_str()) == Some(&true) {
            out.targets.push(y.clone());
        }
    }
    out
}

/// First line of a recovery file; the fingerprint follows it.
const HEAD: &str = "# rung: unsaved edits; base fingerprint ";
/// Prefix of the comment lines that hold the base rows of the edited targets.
const BASE: &str = "# rung-base: ";
/// The fingerprint written when there was no file.
const NO_FILE: &str = "no-file---------";

/// The text of a recovery file: `mine_text` (the programme with the edits,
/// as a save writes it), after comment lines that record the base it was
/// edited from: the fingerprint of the file's bytes then (`None`: there was no
/// file), and the rows of `base` (the list as the file held it) of every
/// target `mine` changed, added or removed. `label` names the programme file.
pub fn recovery_text(
    label: &str,
    base_fp: Option<u64>,
    base: &[Target],
    mine: &[Target],
    mine_text: &str,
) -> String {
    let keys = |l: &[Target]| -> BTreeMap<String, String> {
        l.iter().map(|t| (t.name.clone(), row_key(t))).collect()
    };
    let (bk, mk) = (keys(base), keys(mine));
    let edited: Vec<Target> = base
        .iter()
        .filter(|t| mk.get(&t.name) != bk.get(&t.name))
        .cloned()
        .collect();
    let added: Vec<&str> = mine
        .iter()
        .filter(|t| !bk.contains_key(&t.name))
        .map(|t| t.name.as_str())
        .collect();
    let fp = base_fp.map_or_else(|| NO_FILE.to_string(), |f| format!("{f:016x}"));
    let mut s = format!(
        "{HEAD}{fp} (of {}; the rows below the comments are the programme with the edits)\n",
        crate::error::one_line_cut(label, 200)
    );
    s.push_str(&format!(
        "{BASE}added {}\n",
        serde_json::to_string(&added).unwrap_or_default()
    ));
    for line in to_csv_in(None, &edited).lines() {
        s.push_str(BASE);
        s.push_str(line);
        s.push('\n');
    }
    s.push_str(mine_text);
    s
}

/// A recovery file read back.
#[derive(Debug, Clone, PartialEq)]
pub struct Recovery {
    /// The programme with the edits.
    pub mine: Vec<Target>,
    /// The base the edits were made on, when the file records it: the
    /// fingerprint of the file's bytes then (`None`: there was no file), and
    /// the base list rebuilt from `mine` and the recorded rows.
    pub base: Option<(Option<u64>, Vec<Target>)>,
}

/// Read a recovery file's text. The programme part is read keeping its
/// layout (it is written in the programme file's layout, refused rows
/// included, so up to `tolerated` refused rows are no reason to refuse it);
/// a row that does not read beyond those is returned as its message.
pub fn read_recovery(text: &str, file: &Path, tolerated: usize) -> Result<Recovery, String> {
    // The comment lines this module writes come first; the rest is the programme.
    let head_len: usize = text
        .split_inclusive('\n')
        .take_while(|l| l.starts_with(HEAD) || l.starts_with(BASE))
        .map(str::len)
        .sum();
    let l = parse_csv_keeping(&text[head_len..], file);
    if let Some(p) = l.problems.first()
        && l.problems.len() > tolerated
    {
        return Err(p.to_string());
    }
    let mine = l.targets;
    let Some(fp) = text
        .lines()
        .next()
        .and_then(|h| h.strip_prefix(HEAD))
        .and_then(|r| r.get(..16))
        .and_then(|h| {
            if h == NO_FILE {
                Some(None)
            } else {
                u64::from_str_radix(h, 16).ok().map(Some)
            }
        })
    else {
        return Ok(Recovery { mine, base: None });
    };
    let mut added: Vec<String> = Vec::new();
    let mut rows = String::new();
    for line in text.lines().skip(1) {
        let Some(rest) = line.strip_prefix(BASE) else {
            break;
        };
        if let Some(a) = rest.strip_prefix("added ") {
            added = serde_json::from_str(a).unwrap_or_default();
        } else {
            rows.push_str(rest);
            rows.push('\n');
        }
    }
    let edited = if rows.is_empty() {
        Vec::new()
    } else {
        let b = parse_csv(&rows, file);
        if b.problems.is_empty() {
            b.targets
        } else {
            return Ok(Recovery { mine, base: None });
        }
    };
    // The base: mine, less what mine added, with the edited and removed
    // targets as they were.
    let mut base: Vec<Target> = mine
        .iter()
        .filter(|t| !added.contains(&t.name))
        .map(|t| {
            edited
                .iter()
                .find(|e| e.name == t.name)
                .unwrap_or(t)
                .clone()
        })
        .collect();
    for e in &edited {
        if !base.iter().any(|t| t.name == e.name) {
            base.push(e.clone());
        }
    }
    Ok(Recovery {
        mine,
        base: Some((fp, base)),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t(name: &str, ra: f64) -> Target {
        Target::plain(name, ra, -20.0)
    }

    #[test]
    fn each_side_keeps_its_own_changes() {
        let base = vec![t("A", 1.0), t("B", 2.0), t("C", 3.0)];
        // Theirs edits A and removes C; mine edits B and adds D.
        let theirs = vec![t("A", 10.0), t("B", 2.0)];
        let mine = vec![t("A", 1.0), t("B", 20.0), t("C", 3.0), t("D", 4.0)];
        let m = merge3(&base, &theirs, &mine);
        assert!(m.conflicts.is_empty(), "{m:?}");
        assert_eq!(m.targets, vec![t("A", 10.0), t("B", 20.0), t("D", 4.0)]);
        assert_eq!(m.theirs_changed, vec!["A", "C"]);
        // Both change B differently: a conflict, never settled silently.
        let theirs = vec![t("A", 1.0), t("B", 7.0), t("C", 3.0)];
        let m = merge3(&base, &theirs, &mine);
        assert_eq!(m.conflicts, vec!["B"]);
        // Mine removes a target theirs changed: a conflict too.
        let mine = vec![t("A", 1.0), t("C", 3.0)];
        assert_eq!(merge3(&base, &theirs, &mine).conflicts, vec!["B"]);
        // The same change on both sides is no conflict.
        let m = merge3(&base, &theirs, &theirs);
        assert!(m.conflicts.is_empty() && m.targets == theirs);
    }

    #[test]
    fn recovery_files_carry_their_base() {
        let base = vec![t("A", 1.0), t("B", 2.0), t("C", 3.0)];
        let mine = vec![t("A", 1.0), t("B", 20.0), t("D", 4.0)];
        let text = recovery_text(
            "programme.csv",
            Some(0xabc),
            &base,
            &mine,
            &to_csv_in(None, &mine),
        );
        let r = read_recovery(&text, Path::new("p.unsaved"), 0).unwrap();
        assert_eq!(r.mine, mine);
        let (fp, b) = r.base.unwrap();
        assert_eq!(fp, Some(0xabc));
        let mut names: Vec<_> = b.iter().map(|x| (x.name.clone(), x.ra_deg)).collect();
        names.sort_by(|x, y| x.0.cmp(&y.0));
        assert_eq!(
            names,
            vec![("A".into(), 1.0), ("B".into(), 2.0), ("C".into(), 3.0)]
        );
        // Any targets reader loads the file as the programme with the edits.
        let l = parse_csv(&text, Path::new("p.unsaved"));
        assert!(l.problems.is_empty());
        assert_eq!(l.targets, mine);
        // A file from before the base was recorded reads as edits without base.
        let old = to_csv_in(None, &mine);
        assert_eq!(read_recovery(&old, Path::new("x"), 0).unwrap().base, None);
    }
}
