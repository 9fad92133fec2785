//! The output layer (src/output.rs) as an observer meets it through the
//! `rung` binary: a target name holding terminal escape sequences and a
//! right-to-left override cannot drive the terminal from a table, a number
//! without a value is an empty CSV field and `null` in JSON (never `inf` or
//! `NaN`), and a `|` in a name cannot split the Markdown budget.

use std::path::Path;
use std::process::{Command, Output};

fn rung(args: &[&str], cfg: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", cfg)
        .env("RUNG_NOW", "2026-12-02T01:00:00Z")
        .env_remove("RUNG_DEMO_DIR")
        .output()
        .expect("run the rung binary")
}

/// A name that clears the screen, turns text red, sets the window title and
/// reverses the rest of the line, written the way a hostile file would.
const EVIL: &str = "EV\u{1b}[2J\u{1b}[31mIL\u{1b}]0;owned\u{7}\u{202e}X";
/// The same name as a table shows it.
const SHOWN: &str = "EV\\x1b[2J\\x1b[31mIL\\x1b]0;owned\\x07\\u{202e}X";

fn programme(dir: &Path) -> std::path::PathBuf {
    let f = dir.join("evil.csv");
    std::fs::write(
        &f,
        format!(
            "name,kind,ra,dec,parallax_mas,mag,band,goal_pct\n\
             \"{EVIL}\",parallax,10.0,-30.0,120,12,V,5\n\
             \"A|B\",parallax,40.0,-20.0,50,13,V,0.1\n"
        ),
    )
    .unwrap();
    f
}

fn text(o: &Output) -> (String, String) {
    (
        String::from_utf8(o.stdout.clone()).unwrap(),
        String::from_utf8(o.stderr.clone()).unwrap(),
    )
}

/// No byte of a control sequence and no bidirectional override reaches the terminal.
fn inert(what: &str, s: &str) {
    assert!(
        !s.chars()
            .any(|c| (c.is_control() && c != '\n') || c == '\u{202e}'),
        "{what} prints a control character: {s:?}"
    );
}

#[test]
fn names_with_escape_sequences_are_shown_not_obeyed() {
    let d = tempfile::tempdir().unwrap();
    let f = programme(d.path());
    let f = f.to_str().unwrap();
    let range = ["--from", "2026-12-01", "--to", "2027-02-28"];
    for args in [
        vec!["night", "--targets", f, "--date", "2026-12-01"],
        [vec!["budget", "--targets", f], range.to_vec()].concat(),
        [
            vec!["plan", "--targets", f, "--hours-per-night", "2"],
            range.to_vec(),
        ]
        .concat(),
        vec!["parallax", "--targets", f, "--target", EVIL],
        vec![
            "where",
            "--targets",
            f,
            "--target",
            EVIL,
            "--at",
            "2026-12-02T01:00:00Z",
        ],
    ] {
        let o = rung(&args, d.path());
        let (out, err) = text(&o);
        assert!(o.status.success(), "{:?}: {err}", &args[..1]);
        inert(args[0], &out);
        inert(args[0], &err);
        assert!(out.contains(SHOWN), "{}: {out}", args[0]);
    }
    // An error naming the target (no such target) shows the name the same way.
    let o = rung(
        &["parallax", "--targets", f, "--target", "EVI\u{1b}[31mL"],
        d.path(),
    );
    let (_, err) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    inert("an error", &err);
    assert!(err.contains("EVI\\x1b[31mL"), "{err}");
    // JSON keeps the name as it is (its own escaping makes it inert).
    let o = rung(
        &["night", "--targets", f, "--date", "2026-12-01", "--json"],
        d.path(),
    );
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["targets"][0]["name"], EVIL);
}

#[test]
fn missing_numbers_are_empty_in_csv_null_in_json_and_markdown_cells_hold() {
    let d = tempfile::tempdir().unwrap();
    let f = programme(d.path());
    let f = f.to_str().unwrap();
    // Three months: neither parallax reaches its goal, so neither has an
    // achievable precision (not a finite number); the first needs more
    // seasons, the second's goal is below the floor.
    let args = [
        "budget",
        "--targets",
        f,
        "--from",
        "2026-12-01",
        "--to",
        "2027-02-28",
    ];
    let o = rung(&[&args[..], &["--csv"]].concat(), d.path());
    let (csv, err) = text(&o);
    assert!(o.status.success(), "{err}");
    let lower = csv.to_lowercase();
    assert!(!lower.contains("inf") && !lower.contains("nan"), "{csv}");
    let row = csv.lines().find(|l| l.starts_with("A|B,")).unwrap();
    let cells: Vec<&str> = row.split(',').collect();
    assert_eq!(cells[3], "", "achievable_pct without a value: {row}");
    // A goal of 0.1 % is below what any number of seasons buys.
    assert_eq!(cells[7], "floor", "{row}");

    let o = rung(&[&args[..], &["--json"]].concat(), d.path());
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let r = &v["rows"][1];
    assert!(r["achievable_pct"].is_null(), "{r}");
    // The verdict's words travel with it, the same words the table shows.
    assert_eq!(r["verdict"]["label"], r["verdict_label"]);
    let words = r["verdict"]["text"].as_str().unwrap().to_string();
    assert!(
        words.starts_with("floor ") && words.ends_with(" %"),
        "{words}"
    );
    let (table, _) = text(&rung(&args, d.path()));
    let line = table.lines().find(|l| l.contains("A|B")).unwrap();
    assert!(line.ends_with(&words), "{line} / {words}");

    let (md, _) = text(&rung(&[&args[..], &["--markdown"]].concat(), d.path()));
    let line = md.lines().find(|l| l.contains("A\\|B")).unwrap();
    // Ten cells (with the expected and pessimistic hours), the name's bar escaped.
    assert_eq!(line.matches(" | ").count(), 9, "{line}");
    assert!(line.contains("| – |"), "{line}");
}
