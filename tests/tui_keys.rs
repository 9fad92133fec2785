//! Key sequences through `update`: navigation, date stepping, live mode,
//! filtering and sorting, editing with validation, undo/redo, atomic save and
//! the unsaved-changes question, checked on the resulting state and files.

#[path = "tui_support.rs"]
mod support;

use crossterm::event::KeyCode;
use rung::io::targets::{Kind, parse_csv};
use rung::tui::Msg;
use rung::tui::effects::settle;
use rung::tui::state::{Overlay, View};
use support::*;

fn names(s: &rung::tui::State) -> Vec<String> {
    s.order.iter().map(|i| s.targets[*i].name.clone()).collect()
}

#[test]
fn navigate_views_rows_and_nights() {
    let mut s = demo_state((80, 24));
    assert_eq!(s.selected().unwrap().name, "LPO-P01");
    key(&mut s, KeyCode::Down);
    ch(&mut s, 'j');
    assert_eq!(s.selected().unwrap().name, "LPO-P03");
    key(&mut s, KeyCode::Tab);
    assert_eq!(s.view, View::Tonight);
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[2].contains("LPO-P03"));
    key(&mut s, KeyCode::BackTab);
    assert_eq!(s.view, View::Roster);
    key(&mut s, KeyCode::End);
    assert_eq!(s.selected().unwrap().name, "LPO-T2026b");
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        has(&rows, "LPO-T2026b"),
        "the list scrolls to the selection"
    );
    key(&mut s, KeyCode::Home);
    assert_eq!(s.sel, 0);
    key(&mut s, KeyCode::PageDown);
    assert_eq!(s.sel, s.list_rows());
    // Dates: night, week, month, back to the current night.
    let d = |s: &rung::tui::State| s.date.to_string();
    key(&mut s, KeyCode::Right);
    assert_eq!(d(&s), "2026-12-02");
    ch(&mut s, ']');
    assert_eq!(d(&s), "2026-12-09");
    ch(&mut s, '{');
    assert_eq!(d(&s), "2026-11-09");
    key(&mut s, KeyCode::Left);
    ch(&mut s, '[');
    assert_eq!(d(&s), "2026-11-01");
    ch(&mut s, '}');
    assert_eq!(d(&s), "2026-12-01");
    // The night table follows the date.
    ch(&mut s, '}');
    assert_eq!(s.night.as_ref().unwrap().date.to_string(), "2027-01-01");
    ch(&mut s, 'n');
    assert_eq!(d(&s), "2026-12-01");
    assert_eq!(s.night.as_ref().unwrap().date.to_string(), "2026-12-01");
}

#[test]
fn live_mode_follows_the_clock() {
    let mut s = demo_state((80, 24));
    assert!(!s.live);
    ch(&mut s, 'L');
    assert!(s.live);
    // 2026-12-02T16:00Z is 13:00 local on Dec 2: past local noon, so the night of Dec 2.
    settle(
        &mut s,
        Msg::Tick(rung::astro::time::parse_instant("2026-12-02T16:00:00Z").unwrap()),
    );
    assert_eq!(s.date.to_string(), "2026-12-02");
    assert_eq!(s.night.as_ref().unwrap().date.to_string(), "2026-12-02");
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[0].contains("UTC 16:00  local 13:00") && rows[0].contains("LIVE"));
    // Stepping the date leaves live mode.
    key(&mut s, KeyCode::Right);
    assert!(!s.live);
}

#[test]
fn filter_and_sort() {
    let mut s = demo_state((80, 24));
    ch(&mut s, '/');
    typed(&mut s, "lpo-c0");
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[23].starts_with("filter: lpo-c0"));
    key(&mut s, KeyCode::Enter);
    assert_eq!(names(&s).len(), 9);
    assert!(names(&s).iter().all(|n| n.starts_with("LPO-C0")));
    ch(&mut s, '/');
    key(&mut s, KeyCode::Esc);
    assert_eq!(names(&s).len(), 71);
    // "transient" matches the kind.
    ch(&mut s, '/');
    typed(&mut s, "transient");
    key(&mut s, KeyCode::Enter);
    assert_eq!(names(&s), ["LPO-S2024a", "LPO-T2026a", "LPO-T2026b"]);
    ch(&mut s, '/');
    key(&mut s, KeyCode::Esc);
    // Sort by name, then by hours (most first).
    ch(&mut s, 'o');
    assert_eq!(names(&s)[0], "LPO-C01");
    ch(&mut s, 'o');
    ch(&mut s, 'o');
    ch(&mut s, 'o');
    let hours = |s: &rung::tui::State, n: &str| s.row(n).unwrap().night.observable_hours;
    let by_hours = names(&s);
    assert!(
        by_hours
            .windows(2)
            .all(|w| hours(&s, &w[0]) >= hours(&s, &w[1]))
    );
    ch(&mut s, 'O');
    assert_eq!(names(&s).first(), by_hours.last());
}

#[test]
fn edit_validate_undo_redo_and_save() {
    let dir = tempfile::tempdir().unwrap();
    let (mut s, file) = own_copy_state(dir.path());
    let original = std::fs::read(&file).unwrap();
    assert!(!s.dirty());
    // Rename the first target through the form.
    ch(&mut s, 'e');
    for _ in 0..7 {
        key(&mut s, KeyCode::Backspace);
    }
    typed(&mut s, "LPO-X99");
    key(&mut s, KeyCode::Enter);
    assert!(s.overlay.is_none());
    assert_eq!(s.targets[0].name, "LPO-X99");
    assert!(s.dirty());
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[1].contains("● unsaved"), "{}", rows[1]);
    // Opening and accepting the form unchanged changes nothing (exact coordinates kept).
    key(&mut s, KeyCode::Down);
    ch(&mut s, 'e');
    key(&mut s, KeyCode::Enter);
    assert!(s.targets[1] == demo_targets()[1]);
    assert_eq!(s.undo.len(), 1, "an unchanged form adds no undo step");
    key(&mut s, KeyCode::Up);
    // A new target: validation names the field and keeps the form open.
    ch(&mut s, 'a');
    key(&mut s, KeyCode::Enter);
    match &s.overlay {
        Some(Overlay::Form(f)) => assert_eq!(f.error.as_ref().unwrap().0, "name"),
        o => panic!("{o:?}"),
    }
    typed(&mut s, "NEW-1");
    key(&mut s, KeyCode::Tab);
    key(&mut s, KeyCode::Right); // plain -> parallax
    key(&mut s, KeyCode::Tab);
    typed(&mut s, "10:00:00");
    key(&mut s, KeyCode::Tab);
    typed(&mut s, "-95");
    key(&mut s, KeyCode::Enter);
    let (rows, _) = screen(&s, 80, 24);
    match &s.overlay {
        Some(Overlay::Form(f)) => {
            assert_eq!(f.error.as_ref().unwrap().0, "dec");
            assert_eq!(f.focused(), "dec");
        }
        o => panic!("{o:?}"),
    }
    assert!(has(&rows, "✗ dec:"), "{}", rows.join("\n"));
    for _ in 0..3 {
        key(&mut s, KeyCode::Backspace);
    }
    typed(&mut s, "-20");
    key(&mut s, KeyCode::Enter);
    match &s.overlay {
        Some(Overlay::Form(f)) => assert_eq!(f.error.as_ref().unwrap().0, "parallax_mas"),
        o => panic!("{o:?}"),
    }
    typed(&mut s, "50");
    key(&mut s, KeyCode::Enter);
    assert!(s.overlay.is_none());
    let new = s.targets.iter().find(|t| t.name == "NEW-1").unwrap();
    assert_eq!(new.kind, Kind::Parallax);
    assert_eq!(new.ra_deg, 150.0);
    assert_eq!(new.dec_deg, -20.0);
    assert_eq!(new.parallax_mas, Some(50.0));
    assert_eq!(s.selected().unwrap().name, "NEW-1");
    assert!(
        s.row("NEW-1").is_some(),
        "the night table includes the new target"
    );
    // A duplicate name is refused.
    ch(&mut s, 'a');
    typed(&mut s, "LPO-P02");
    key(&mut s, KeyCode::Tab);
    key(&mut s, KeyCode::Tab);
    typed(&mut s, "1");
    key(&mut s, KeyCode::Tab);
    typed(&mut s, "1");
    key(&mut s, KeyCode::Enter);
    match &s.overlay {
        Some(Overlay::Form(f)) => {
            assert!(
                f.error
                    .as_ref()
                    .unwrap()
                    .1
                    .contains("already in the programme")
            )
        }
        o => panic!("{o:?}"),
    }
    key(&mut s, KeyCode::Esc);
    assert_eq!(s.targets.len(), 72);
    // Remove (with the question), undo, redo.
    ch(&mut s, 'd');
    ch(&mut s, 'y');
    assert_eq!(s.targets.len(), 71);
    assert!(!s.targets.iter().any(|t| t.name == "NEW-1"));
    ch(&mut s, 'u');
    assert_eq!(s.targets.len(), 72);
    ch(&mut s, 'U');
    assert_eq!(s.targets.len(), 71);
    ch(&mut s, 'u');
    ch(&mut s, 'u');
    ch(&mut s, 'u');
    assert!(
        *s.targets == demo_targets(),
        "three undos return to the file"
    );
    assert!(!s.dirty());
    ch(&mut s, 'U');
    assert_eq!(s.targets[0].name, "LPO-X99");
    // Save: atomic write, the original kept once as .bak, the file reads back the same.
    ch(&mut s, 'w');
    assert!(!s.dirty());
    let back = parse_csv(&std::fs::read_to_string(&file).unwrap(), &file);
    assert!(back.problems.is_empty());
    assert_eq!(back.targets, *s.targets);
    let bak = dir.path().join("mine.csv.bak");
    assert_eq!(std::fs::read(&bak).unwrap(), original);
    // Only the file, its backup, no temporary left behind.
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[23].starts_with("saved "), "{}", rows[23]);
    // A second save does not overwrite the backup.
    ch(&mut s, 'e');
    key(&mut s, KeyCode::Backspace);
    typed(&mut s, "8");
    key(&mut s, KeyCode::Enter);
    ch(&mut s, 'w');
    assert_eq!(std::fs::read(&bak).unwrap(), original);
    assert_eq!(
        parse_csv(&std::fs::read_to_string(&file).unwrap(), &file).targets[0].name,
        "LPO-X98"
    );
}

#[test]
fn demo_edits_go_to_the_users_file_and_quit_asks_first() {
    let dir = tempfile::tempdir().unwrap();
    let user = dir.path().join("cfg").join("programme.csv");
    let demo_before = std::fs::read(demo_file()).unwrap();
    let mut s = state_with(
        demo_targets(),
        Some(demo_file()),
        user.clone(),
        true,
        (80, 24),
        true,
    );
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[23].contains("saving writes your own") && rows[23].contains("programme.csv"));
    ch(&mut s, 'd');
    ch(&mut s, 'y');
    // Quit with unsaved changes asks; "n" stays.
    ch(&mut s, 'q');
    assert!(matches!(s.overlay, Some(Overlay::Question(_))));
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "unsaved changes"));
    ch(&mut s, 'n');
    assert!(!s.quit && s.overlay.is_none());
    ch(&mut s, 'w');
    assert_eq!(
        std::fs::read(demo_file()).unwrap(),
        demo_before,
        "demo untouched"
    );
    let saved = parse_csv(&std::fs::read_to_string(&user).unwrap(), &user);
    assert_eq!(saved.targets.len(), 70);
    assert!(!s.programme.is_demo);
    assert!(!user.with_extension("csv.bak").exists());
    // Nothing unsaved: quit at once.
    ch(&mut s, 'q');
    assert!(s.quit);
}

#[test]
fn quit_discarding_and_site_picker() {
    let mut s = demo_state((80, 24));
    ch(&mut s, 'd');
    ch(&mut s, 'y');
    ch(&mut s, 'q');
    ch(&mut s, 'y');
    assert!(s.quit);
    let mut s = demo_state((80, 24));
    ch(&mut s, 'p');
    key(&mut s, KeyCode::Down);
    key(&mut s, KeyCode::Enter);
    assert_eq!(s.site().name, "sierra-alcaravan");
    assert_eq!(s.night.as_ref().unwrap().site, "sierra-alcaravan");
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        rows[0].starts_with("sierra-alcaravan  UTC 01:00  local 02:00"),
        "{}",
        rows[0]
    );
    // The instrument picker.
    ch(&mut s, 'i');
    assert!(matches!(s.overlay, Some(Overlay::Instruments { .. })));
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "● lucero-1m"));
    key(&mut s, KeyCode::Esc);
    assert!(s.overlay.is_none() && s.settings.instrument().name == "lucero-1m");
    // Minimum altitude steps change the windows.
    let h0 = s.row("LPO-P09").unwrap().night.observable_hours;
    ch(&mut s, '-');
    assert_eq!(s.settings.limits.min_alt_deg, 25.0);
    assert!(s.row("LPO-P09").unwrap().night.observable_hours >= h0);
}

#[test]
fn chase_and_phase_lists_scroll_apart_from_the_selection() {
    let mut s = demo_state((80, 24));
    ch(&mut s, '6');
    let t = s
        .order
        .iter()
        .position(|i| s.targets[*i].name == "LPO-T2026a")
        .unwrap();
    s.sel = t;
    settle(&mut s, Msg::Act(rung::tui::Action::Down));
    settle(&mut s, Msg::Act(rung::tui::Action::Up));
    assert_eq!(s.selected().unwrap().name, "LPO-T2026a");
    let Some(rung::tui::state::MethodBody::Chase(c)) = s.method_now().cloned() else {
        panic!("no chase")
    };
    // The rows under the nights: the summary and the notes, each on one
    // line or two.
    let rows_shown = 24 - 3 - 5 - rung::tui::views::chase_foot::extra_rows(&c, 80);
    assert!(c.nights.len() > rows_shown, "{} nights", c.nights.len());
    let first_row = |s: &rung::tui::State| {
        let (rows, _) = screen(s, 80, 24);
        rows[4].clone() // status, tabs, title, header, then the nights
    };
    let night = |k: usize| c.nights[k].night.format("%a %b %d").to_string();
    assert!(first_row(&s).starts_with(&night(0)));
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        has(
            &rows,
            &format!("rows 1-{rows_shown} of {} · J/K scroll", c.nights.len())
        ),
        "{rows:?}"
    );
    for _ in 0..3 {
        ch(&mut s, 'J');
    }
    assert_eq!(s.detail_scroll, 3);
    assert!(first_row(&s).starts_with(&night(3)), "{}", first_row(&s));
    assert_eq!(
        s.selected().unwrap().name,
        "LPO-T2026a",
        "the selection stays"
    );
    // Held at the end of the list, and back.
    for _ in 0..500 {
        ch(&mut s, 'J');
    }
    let max = c.nights.len() - rows_shown;
    assert_eq!(s.detail_scroll, max);
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[4 + rows_shown - 1].starts_with(&night(c.nights.len() - 1)));
    ch(&mut s, 'K');
    assert_eq!(s.detail_scroll, max - 1);
    // Another target starts at its first night.
    key(&mut s, KeyCode::Down);
    assert_eq!(s.detail_scroll, 0);
    // The Phase view scrolls its nights the same way.
    let p = s
        .order
        .iter()
        .position(|i| s.targets[*i].kind == Kind::Pulsator)
        .unwrap();
    ch(&mut s, '5');
    s.sel = p;
    settle(&mut s, Msg::Act(rung::tui::Action::Down));
    settle(&mut s, Msg::Act(rung::tui::Action::Up));
    let Some(rung::tui::state::MethodBody::Phase(r)) = s.method_now().cloned() else {
        panic!("no phase report")
    };
    let shown = 24 - 3 - 6;
    assert!(r.windows.len() > shown, "{} windows", r.windows.len());
    ch(&mut s, 'J');
    let (rows, _) = screen(&s, 80, 24);
    let want = r.windows[1].night.format("%a %b %d").to_string();
    assert!(rows[5].starts_with(&want), "{}", rows[5]);
    // Where there is no list, the keys say so and change nothing.
    ch(&mut s, '1');
    ch(&mut s, 'J');
    assert_eq!(s.detail_scroll, 0);
    assert!(
        s.message
            .as_ref()
            .unwrap()
            .0
            .contains("nothing to scroll here")
    );
}

/// The Chase view's summary and note are shown whole at 80 columns, each on
/// a second line when it needs one, the nights giving up those rows (they
/// were cut at the 80th column: "provisional, not observable (the us"); the
/// list still scrolls to its last night.
#[test]
fn the_chase_summary_takes_a_second_line_and_the_list_still_ends_on_its_last_night() {
    let mut s = demo_state((80, 24));
    ch(&mut s, '6');
    s.sel = s
        .order
        .iter()
        .position(|i| s.targets[*i].name == "LPO-T2026b")
        .unwrap();
    // (The last target: up, then down to it, to compute its chase.)
    settle(&mut s, Msg::Act(rung::tui::Action::Up));
    settle(&mut s, Msg::Act(rung::tui::Action::Down));
    assert_eq!(s.selected().unwrap().name, "LPO-T2026b");
    let Some(rung::tui::state::MethodBody::Chase(c)) = s.method_now().cloned() else {
        panic!("no chase")
    };
    let extra = rung::tui::views::chase_foot::extra_rows(&c, 80);
    assert!(extra >= 1, "the demo's late supernova needs a second line");
    let rows_shown = 24 - 3 - 5 - extra;
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        has(
            &rows,
            &format!("rows 1-{rows_shown} of {} · J/K scroll", c.nights.len())
        ),
        "{rows:?}"
    );
    // The summary whole, over the lines under the nights.
    let at = 4 + rows_shown;
    let under: String = rows[at..at + 2]
        .iter()
        .map(|l| l.trim_end())
        .collect::<Vec<_>>()
        .join(" ");
    let verdict = c.verdict.text();
    assert!(under.starts_with("σd/d "), "{under}");
    assert!(
        under.ends_with(&format!("provisional, {verdict}")),
        "{under}"
    );
    // Held at the end of the list: its last night on the last row.
    for _ in 0..500 {
        ch(&mut s, 'J');
    }
    assert_eq!(s.detail_scroll, c.nights.len() - rows_shown);
    let (rows, _) = screen(&s, 80, 24);
    let last = c.nights[c.nights.len() - 1]
        .night
        .format("%a %b %d")
        .to_string();
    assert!(rows[4 + rows_shown - 1].starts_with(&last), "{rows:?}");
}

#[test]
fn unsaved_edits_are_kept_beside_the_file_until_saved() {
    let dir = tempfile::tempdir().unwrap();
    let (mut s, file) = own_copy_state(dir.path());
    let recovery = dir.path().join("mine.csv.unsaved");
    assert_eq!(s.programme.recovery_path(), recovery);
    assert!(!recovery.exists());
    // Every change that leaves the programme unsaved is written beside it.
    ch(&mut s, 'd');
    ch(&mut s, 'y');
    let kept = parse_csv(&std::fs::read_to_string(&recovery).unwrap(), &recovery);
    assert!(kept.problems.is_empty());
    assert_eq!(kept.targets, *s.targets);
    assert_eq!(kept.targets.len(), 70);
    ch(&mut s, 'd');
    ch(&mut s, 'y');
    let kept = parse_csv(&std::fs::read_to_string(&recovery).unwrap(), &recovery);
    assert_eq!(kept.targets.len(), 69);
    // Undoing back to the file leaves nothing unsaved: the file goes.
    ch(&mut s, 'u');
    ch(&mut s, 'u');
    assert!(!s.dirty());
    assert!(!recovery.exists());
    // Redo, then save: the programme file has the edits and the recovery file goes.
    ch(&mut s, 'U');
    assert!(recovery.exists());
    ch(&mut s, 'w');
    assert!(!recovery.exists());
    let saved = parse_csv(&std::fs::read_to_string(&file).unwrap(), &file);
    assert_eq!(saved.targets.len(), 70);
    // Quitting and dropping the edits (q, y) removes it as well.
    ch(&mut s, 'd');
    ch(&mut s, 'y');
    assert!(recovery.exists());
    ch(&mut s, 'q');
    ch(&mut s, 'y');
    assert!(s.quit && !recovery.exists());
}

#[test]
fn unsaved_edits_left_by_a_session_are_offered_back() {
    use rung::tui::state::{Question, Recovered};
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("mine.csv");
    let recovery = dir.path().join("mine.csv.unsaved");
    let mut edited = demo_targets();
    edited.truncate(20);
    std::fs::write(&recovery, rung::io::write_targets::to_csv(&edited)).unwrap();
    // What `rung` finds at start (src/cli/tui.rs) comes in through Setup and
    // `init` asks about it.
    let open_with = |recovered: Option<Recovered>| {
        let (mut setup, _) = own_copy_setup(dir.path());
        setup.recovered = recovered;
        rung::tui::effects::open(setup)
    };
    let offer = || Recovered {
        path: recovery.clone(),
        targets: edited.clone(),
        written: Some("2026-12-02 03:00".into()),
        note: None,
    };
    // Yes: the edits come back as unsaved edits (the file itself is untouched).
    let mut s = open_with(Some(offer()));
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "Unsaved edits found"), "{rows:?}");
    assert!(
        has(&rows, "(20") && has(&rows, "targets). Restore them?"),
        "{rows:?}"
    );
    // A stray key does not answer (its "no" would move a file).
    ch(&mut s, 'j');
    key(&mut s, KeyCode::Down);
    assert!(matches!(
        s.overlay,
        Some(Overlay::Question(Question::Restore(_)))
    ));
    ch(&mut s, 'y');
    assert!(s.overlay.is_none());
    assert_eq!(*s.targets, edited);
    assert!(s.dirty());
    assert_eq!(
        parse_csv(&std::fs::read_to_string(&file).unwrap(), &file)
            .targets
            .len(),
        71
    );
    assert_eq!(
        parse_csv(&std::fs::read_to_string(&recovery).unwrap(), &recovery).targets,
        edited
    );
    // Undo takes the restore back like any change.
    ch(&mut s, 'u');
    assert_eq!(s.targets.len(), 71);
    assert!(!recovery.exists());
    // No: the file is set aside, not deleted, and the programme is as loaded.
    std::fs::write(&recovery, rung::io::write_targets::to_csv(&edited)).unwrap();
    let mut s = open_with(Some(offer()));
    ch(&mut s, 'n');
    assert!(s.overlay.is_none());
    assert_eq!(s.targets.len(), 71);
    assert!(!recovery.exists());
    let old = dir.path().join("mine.csv.unsaved.old");
    assert_eq!(
        parse_csv(&std::fs::read_to_string(&old).unwrap(), &old).targets,
        edited
    );
    assert!(s.message.as_ref().unwrap().0.contains("set aside in"));
}
