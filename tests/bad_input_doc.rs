//! The bad-input table (docs/bad-input.md) holds together: every case has an
//! id of its own (an earlier pass gave C1–C4, O1–O3 and R1–R4 to two cases
//! each), and every case names the test that asserts it (a file under
//! `tests/` or `src/` that exists, and the test function in it), or says why
//! it is not tested.

use std::collections::BTreeMap;
use std::path::Path;

fn doc() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/bad-input.md"))
        .unwrap()
}

/// The table rows: (line number, id, test cell).
fn rows() -> Vec<(usize, String, String)> {
    let mut out = Vec::new();
    for (i, line) in doc().lines().enumerate() {
        if !line.starts_with("| ") {
            continue;
        }
        let cells: Vec<&str> = line.trim_matches('|').split(" | ").map(str::trim).collect();
        let id = cells[0];
        if id == "id" || id.starts_with('-') || cells.len() < 4 {
            continue;
        }
        out.push((i + 1, id.to_string(), cells.last().unwrap().to_string()));
    }
    out
}

#[test]
fn every_case_has_an_id_of_its_own() {
    let rows = rows();
    assert!(rows.len() > 150, "{} rows", rows.len());
    let mut seen: BTreeMap<&str, usize> = BTreeMap::new();
    let mut twice = Vec::new();
    for (line, id, _) in &rows {
        assert!(
            id.chars().next().is_some_and(|c| c.is_ascii_uppercase())
                && id.chars().any(|c| c.is_ascii_digit()),
            "line {line}: {id:?} is not an id like C12"
        );
        if let Some(first) = seen.insert(id, *line) {
            twice.push(format!("{id} on lines {first} and {line}"));
        }
    }
    assert!(twice.is_empty(), "ids used twice: {}", twice.join("; "));
}

#[test]
fn every_case_names_a_test_that_exists() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut named = 0;
    let mut last_ok = false;
    for (line, id, cell) in rows() {
        // `file::function` or `file` in backquotes.
        let refs: Vec<&str> = cell
            .split('`')
            .skip(1)
            .step_by(2)
            .filter(|r| r.starts_with("tests/") || r.starts_with("src/"))
            .collect();
        for r in &refs {
            let (file, func) = match r.split_once("::") {
                Some((f, n)) => (f, Some(n)),
                None => (*r, None),
            };
            let path = root.join(file);
            let text = std::fs::read_to_string(&path)
                .unwrap_or_else(|e| panic!("line {line} ({id}): {file}: {e}"));
            if let Some(n) = func {
                assert!(
                    text.contains(&format!("fn {n}(")),
                    "line {line} ({id}): {file} has no test `fn {n}`"
                );
            }
            named += 1;
        }
        let ok = !refs.is_empty()
            || (cell.starts_with("same") && last_ok)
            || cell.starts_with("not tested");
        assert!(ok, "line {line} ({id}): no test named in {cell:?}");
        last_ok = ok && !cell.starts_with("not tested");
    }
    assert!(named > 40, "{named} tests named");
}

/// I8: an instrument named twice in one file is refused with both lines
/// (the last one used to win without a word).
#[test]
fn an_instrument_named_twice_is_refused() {
    use rung::photometry::instrument::{BUILTIN_INSTRUMENTS, parse_instruments};
    let first = &BUILTIN_INSTRUMENTS[BUILTIN_INSTRUMENTS.find("[[instrument]]").unwrap()..];
    let first = &first[..first[1..]
        .find("[[instrument]]")
        .map_or(first.len(), |i| i + 1)];
    let text = format!("{first}\n{first}");
    let second = text[first.len()..].find("name = ").unwrap() + first.len();
    let line = text[..second].lines().count() + 1;
    let name = first
        .lines()
        .find_map(|l| l.strip_prefix("name = "))
        .unwrap()
        .trim_matches('"');
    let e = parse_instruments(&text, Path::new("i.toml"))
        .unwrap_err()
        .to_string();
    assert_eq!(
        e,
        format!(
            "i.toml, line {line}, field 'name': instrument '{name}' is named twice in this file (first at line 1); rename or remove one"
        )
    );
}
