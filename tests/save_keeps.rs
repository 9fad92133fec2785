//! Saving from the UI keeps what the user wrote: a programme is loaded as the
//! UI loads it, one field of one target is edited through the form, the
//! programme is saved, and the file differs from what the user wrote in that
//! field only: comments, blank lines, column order, spacing, quoting, a
//! column rung does not read, a refused row, sexagesimal angles and numbers
//! as typed all stay.

#[path = "tui_support.rs"]
mod support;

use crossterm::event::KeyCode;
use rung::io::targets::{load_keeping, parse_csv};
use rung::tui::state::{Overlay, State};
use std::path::{Path, PathBuf};
use support::*;

/// A programme as a user writes one: comments, spaces around fields, a quoted
/// note, a column rung does not read, a band in lower case, RA in hours and
/// in degrees, and a row rung refuses (RA 25h).
const MINE: &str = "\
# My parallax programme, semester 2027A (invented)
# columns as I like them; RA in hours
name , ra , dec , kind , parallax_mas , mag , band , goal_pct , observer , notes
LPO-P01 , 00:48:00.0 , -31:12:00 , parallax , 68.4 , 15.3 , R , 3 , ana , \"nearby dwarf, candidate\"

# the next one needs a second look
LPO-P03,04:05:12.0,-18:24:00,parallax,112.0,16.4,I,2,bo,
LPO-P12,334.1000,-1.3000,parallax,63.9,18.6,i,3,,plain decimal degrees
BROKEN,25:00:00,-1,parallax,10,,,,,refused row stays
";

/// The UI opened on `MINE` written to `dir/mine.csv`, loaded as `rung tui` loads it.
fn open_mine(dir: &Path) -> (State, PathBuf) {
    let file = dir.join("mine.csv");
    std::fs::write(&file, MINE).unwrap();
    let l = load_keeping(&file).unwrap();
    assert_eq!(l.targets.len(), 3);
    assert_eq!(l.problems.len(), 1, "{:?}", l.problems);
    assert_eq!(l.warnings.len(), 1, "{:?}", l.warnings);
    let mut setup = setup_with(
        l.targets,
        Some(file.clone()),
        file.clone(),
        false,
        (80, 24),
        true,
    );
    setup.programme.refused_rows = 1;
    setup.programme.layout = l.layout;
    (rung::tui::effects::open(setup), file)
}

fn select(s: &mut State, name: &str) {
    key(s, KeyCode::Home);
    for _ in 0..s.targets.len() {
        if s.selected().unwrap().name == name {
            return;
        }
        key(s, KeyCode::Down);
    }
    panic!("{name} not in the roster");
}

/// Open the form on `name`, put the focus on `field`, replace its text.
fn edit(s: &mut State, name: &str, field: &str, text: &str) {
    select(s, name);
    ch(s, 'e');
    let Some(Overlay::Form(f)) = &s.overlay else {
        panic!("no form")
    };
    let at = f.visible().iter().position(|c| *c == field).unwrap();
    let old = f.value(field).chars().count();
    for _ in 0..at {
        key(s, KeyCode::Down);
    }
    for _ in 0..old {
        key(s, KeyCode::Backspace);
    }
    typed(s, text);
    key(s, KeyCode::Enter);
    assert!(s.overlay.is_none(), "the form was refused: {:?}", s.overlay);
}

/// (line number, before, after) of the lines that differ.
fn diff(before: &str, after: &str) -> Vec<(usize, String, String)> {
    assert_eq!(before.lines().count(), after.lines().count(), "{after}");
    before
        .lines()
        .zip(after.lines())
        .enumerate()
        .filter(|(_, (a, b))| a != b)
        .map(|(i, (a, b))| (i + 1, a.to_string(), b.to_string()))
        .collect()
}

#[test]
fn editing_one_field_changes_that_field_only() {
    let dir = tempfile::tempdir().unwrap();
    let (mut s, file) = open_mine(dir.path());
    edit(&mut s, "LPO-P03", "goal_pct", "2.5");
    ch(&mut s, 'w');
    assert!(!s.dirty());
    let saved = std::fs::read_to_string(&file).unwrap();
    assert_eq!(
        diff(MINE, &saved),
        [(
            7,
            "LPO-P03,04:05:12.0,-18:24:00,parallax,112.0,16.4,I,2,bo,".to_string(),
            "LPO-P03,04:05:12.0,-18:24:00,parallax,112.0,16.4,I,2.5,bo,".to_string()
        )]
    );
    // What was saved reads back to the programme in the UI.
    let back = parse_csv(&saved, &file);
    assert_eq!(back.targets, *s.targets);
    // The original is kept once beside it, as before.
    assert_eq!(
        std::fs::read_to_string(dir.path().join("mine.csv.bak")).unwrap(),
        MINE
    );
    // A second edit on a row with spaces and quotes: only its field changes,
    // the row's other fields keep their spaces and quotes.
    edit(&mut s, "LPO-P01", "parallax_mas", "68.9");
    ch(&mut s, 'w');
    let again = std::fs::read_to_string(&file).unwrap();
    assert_eq!(
        diff(&saved, &again),
        [(
            4,
            "LPO-P01 , 00:48:00.0 , -31:12:00 , parallax , 68.4 , 15.3 , R , 3 , ana , \"nearby dwarf, candidate\"".to_string(),
            "LPO-P01 , 00:48:00.0 , -31:12:00 , parallax ,68.9, 15.3 , R , 3 , ana , \"nearby dwarf, candidate\"".to_string()
        )]
    );
}

#[test]
fn a_save_with_nothing_changed_writes_the_file_as_it_was() {
    let dir = tempfile::tempdir().unwrap();
    let (mut s, file) = open_mine(dir.path());
    // Open the form and accept it unchanged, then save.
    select(&mut s, "LPO-P12");
    ch(&mut s, 'e');
    key(&mut s, KeyCode::Enter);
    ch(&mut s, 'w');
    assert_eq!(std::fs::read_to_string(&file).unwrap(), MINE);
}

#[test]
fn angles_stay_in_the_form_they_were_typed_in() {
    let dir = tempfile::tempdir().unwrap();
    let (mut s, file) = open_mine(dir.path());
    // The form shows the RA as written.
    select(&mut s, "LPO-P03");
    ch(&mut s, 'e');
    match &s.overlay {
        Some(Overlay::Form(f)) => assert_eq!(f.value("ra"), "04:05:12.0"),
        o => panic!("{o:?}"),
    }
    key(&mut s, KeyCode::Esc);
    // A new RA typed in hours is saved in hours, a new target's as typed.
    edit(&mut s, "LPO-P03", "ra", "04:05:13.5");
    ch(&mut s, 'a');
    for (field, text) in [("name", "MY-NEW"), ("ra", "10:00:00"), ("dec", "-45:30")] {
        let Some(Overlay::Form(f)) = &s.overlay else {
            panic!("no form")
        };
        let at = f.visible().iter().position(|c| *c == field).unwrap();
        let now = f.visible().iter().position(|c| *c == f.focused()).unwrap();
        for _ in now..at {
            key(&mut s, KeyCode::Down);
        }
        typed(&mut s, text);
    }
    key(&mut s, KeyCode::Enter);
    assert!(s.overlay.is_none(), "{:?}", s.overlay);
    ch(&mut s, 'w');
    let saved = std::fs::read_to_string(&file).unwrap();
    let lines: Vec<&str> = saved.lines().collect();
    assert_eq!(
        lines[6],
        "LPO-P03,04:05:13.5,-18:24:00,parallax,112.0,16.4,I,2,bo,"
    );
    assert_eq!(lines[9], "MY-NEW,10:00:00,-45:30,plain,,,V,,,");
    assert_eq!(lines.len(), 10);
    let back = parse_csv(&saved, &file);
    assert_eq!(back.targets[3].ra_deg, 150.0);
}

#[test]
fn removing_every_target_keeps_the_comments_and_the_refused_row() {
    let dir = tempfile::tempdir().unwrap();
    let (mut s, file) = open_mine(dir.path());
    for _ in 0..3 {
        ch(&mut s, 'd');
        ch(&mut s, 'y');
    }
    assert!(s.targets.is_empty());
    ch(&mut s, 'w');
    let saved = std::fs::read_to_string(&file).unwrap();
    assert_eq!(
        saved,
        "# My parallax programme, semester 2027A (invented)
# columns as I like them; RA in hours
name , ra , dec , kind , parallax_mas , mag , band , goal_pct , observer , notes

# the next one needs a second look
BROKEN,25:00:00,-1,parallax,10,,,,,refused row stays
"
    );
}
