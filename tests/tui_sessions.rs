//! Two UI sessions on one programme file, driven key by key through `update`
//! (the same calls the terminal runner makes): neither loses or silently
//! undoes the other's edits. Each keeps its unsaved edits in a file of its
//! own, a save that finds the file changed merges target by target, and a
//! target both changed is a question, never a silent choice. The same with
//! two real processes: `tests/tui_tmux.rs::two_sessions_on_one_programme`.

#[path = "tui_support.rs"]
mod support;

use rung::io::targets::{Target, parse_csv};
use rung::tui::state::{Overlay, Question, State};
use std::path::Path;
use support::*;

fn names(s: &State) -> Vec<String> {
    s.targets.iter().map(|t| t.name.clone()).collect()
}

fn file_targets(p: &Path) -> Vec<Target> {
    let l = parse_csv(&std::fs::read_to_string(p).unwrap(), p);
    assert!(l.problems.is_empty(), "{:?}", l.problems);
    l.targets
}

fn file_names(p: &Path) -> Vec<String> {
    file_targets(p).into_iter().map(|t| t.name).collect()
}

/// Two sessions on `dir/mine.csv`: the first, and a second that found the
/// first running (its unsaved edits go to `mine.csv.unsaved-<pid>`, as
/// `rung::io::session::Claim` gives it).
fn two_sessions(dir: &Path) -> (State, State, std::path::PathBuf) {
    let file = dir.join("mine.csv");
    // A small programme keeps the sessions quick to open (four demo targets).
    std::fs::write(
        &file,
        rung::io::write_targets::to_csv(&demo_subset(&[
            "LPO-P01",
            "LPO-P03",
            "LPO-C05",
            "LPO-T2026a",
        ])),
    )
    .unwrap();
    let (a, _) = own_copy_setup_as_is(dir);
    let mut b = a.clone();
    b.programme.instance = Some(4_194_998);
    (
        rung::tui::effects::open(a),
        rung::tui::effects::open(b),
        file,
    )
}

/// Remove the selected target (d, y).
fn remove_selected(s: &mut State) -> String {
    let name = s.selected().unwrap().name.clone();
    ch(s, 'd');
    ch(s, 'y');
    name
}

#[test]
fn a_save_never_removes_or_undoes_the_other_sessions_edits() {
    let dir = tempfile::tempdir().unwrap();
    let (mut a, mut b, file) = two_sessions(dir.path());
    let (ra, rb) = (a.programme.recovery_path(), b.programme.recovery_path());
    assert_eq!(ra, dir.path().join("mine.csv.unsaved"));
    assert_eq!(rb, dir.path().join("mine.csv.unsaved-4194998"));
    // A removes the first target, B the last.
    let gone_a = remove_selected(&mut a);
    key(&mut b, crossterm::event::KeyCode::End);
    let gone_b = remove_selected(&mut b);
    assert!(ra.exists() && rb.exists());
    // A saves: its own unsaved-edits file goes, B's stays (it used to be
    // the same file, deleted by A's save with B's edits in it).
    ch(&mut a, 'w');
    assert!(!ra.exists());
    assert_eq!(
        file_targets(&rb).len(),
        3,
        "B's unsaved edits are still beside the file"
    );
    // B saves: the file changed since B read it, so B's save merges: both
    // removals are in the file (B's save used to put A's target back).
    ch(&mut b, 'w');
    let now = file_names(&file);
    assert_eq!(now.len(), 2, "{now:?}");
    assert!(!now.contains(&gone_a) && !now.contains(&gone_b));
    assert_eq!(names(&b), now, "B now shows what it wrote");
    assert!(!b.dirty() && !rb.exists());
    let msg = b.message.clone().unwrap().0;
    assert!(
        msg.contains("merged with the changes another session saved to it")
            && msg.contains(&gone_a),
        "{msg}"
    );
    // A edits again and saves: B's removal stays removed too.
    let gone_a2 = remove_selected(&mut a);
    ch(&mut a, 'w');
    let now = file_names(&file);
    assert_eq!(now.len(), 1, "{now:?}");
    assert!(!now.contains(&gone_b) && !now.contains(&gone_a2));
}

/// Edit the RA of the selected target through the form (e, Tab, Tab, clear, type, Enter).
fn set_ra(s: &mut State, ra: &str) {
    use crossterm::event::KeyCode;
    ch(s, 'e');
    key(s, KeyCode::Tab);
    key(s, KeyCode::Tab);
    for _ in 0..30 {
        key(s, KeyCode::Backspace);
    }
    typed(s, ra);
    key(s, KeyCode::Enter);
    assert!(s.overlay.is_none(), "{:?}", s.overlay);
}

#[test]
fn a_target_both_changed_is_asked_about_never_settled_silently() {
    let dir = tempfile::tempdir().unwrap();
    let (mut a, mut b, file) = two_sessions(dir.path());
    let name = a.selected().unwrap().name.clone();
    set_ra(&mut a, "10:00:00");
    set_ra(&mut b, "11:00:00");
    assert_eq!(a.selected().unwrap().ra_deg, 150.0);
    assert_eq!(b.selected().unwrap().ra_deg, 165.0);
    ch(&mut a, 'w');
    let by_a = std::fs::read(&file).unwrap();
    // B's save finds A's change to the same target: nothing is written, and
    // B is asked.
    ch(&mut b, 'w');
    assert_eq!(std::fs::read(&file).unwrap(), by_a);
    assert!(b.dirty());
    match &b.overlay {
        Some(Overlay::Question(Question::Overwrite(n))) => assert_eq!(n, &vec![name.clone()]),
        o => panic!("{o:?}"),
    }
    let (rows, _) = screen(&b, 80, 24);
    assert!(has(&rows, "Changed by another session"), "{rows:?}");
    // No: the file stays as A saved it, B's edits stay unsaved and kept.
    ch(&mut b, 'n');
    assert!(b.overlay.is_none() && b.dirty());
    assert_eq!(std::fs::read(&file).unwrap(), by_a);
    let kept = file_targets(&b.programme.recovery_path());
    assert_eq!(kept.iter().find(|t| t.name == name).unwrap().ra_deg, 165.0);
    // Asked again, yes: B's programme is written, and A's version of the file
    // is kept as the backup.
    ch(&mut b, 'w');
    ch(&mut b, 'y');
    assert!(!b.dirty());
    let now = file_targets(&file);
    assert_eq!(now.iter().find(|t| t.name == name).unwrap().ra_deg, 165.0);
    assert_eq!(
        std::fs::read(rung::io::atomic::backup_path(&file)).unwrap(),
        by_a
    );
}

/// A session killed with unsaved edits while another saved: the next start
/// offers the killed session's edits, merged with what was saved since (they
/// used to be lost: the shared file had been deleted by the other's save).
#[test]
fn edits_of_a_killed_session_are_offered_merged_with_later_saves() {
    let dir = tempfile::tempdir().unwrap();
    let (mut a, mut b, file) = two_sessions(dir.path());
    key(&mut b, crossterm::event::KeyCode::End);
    let gone_b = remove_selected(&mut b);
    let rb = b.programme.recovery_path();
    drop(b); // killed: nothing more happens in B (its process 4194998 is gone)
    let gone_a = remove_selected(&mut a);
    ch(&mut a, 'w');
    drop(a);
    // The next start (as src/cli/tui.rs does it): the first session finds
    // B's file, whose process is gone, and offers it merged.
    let (mut setup, _) = own_copy_setup_as_is(dir.path());
    let (recovered, _) =
        rung::tui::effects::find_recovery(&setup.programme, &setup.targets, None, true);
    let r = recovered.expect("B's edits are offered");
    assert_eq!(r.path, rb);
    let names: Vec<&str> = r.targets.iter().map(|t| t.name.as_str()).collect();
    assert_eq!(names.len(), 2, "{names:?}");
    assert!(!names.contains(&gone_a.as_str()) && !names.contains(&gone_b.as_str()));
    let note = r.note.clone().unwrap();
    assert!(
        note.contains("were made on an earlier version of") && note.contains(&gone_a),
        "{note}"
    );
    setup.recovered = Some(r);
    let mut c = rung::tui::effects::open(setup);
    let (rows, _) = screen(&c, 80, 24);
    assert!(has(&rows, "Unsaved edits found"), "{rows:?}");
    ch(&mut c, 'y');
    assert_eq!(c.targets.len(), 2);
    assert!(c.dirty());
    // B's file is taken over by C's own, so it is not offered twice.
    assert!(!rb.exists());
    assert_eq!(file_targets(&c.programme.recovery_path()).len(), 2);
    ch(&mut c, 'w');
    assert_eq!(file_names(&file).len(), 2);
}

/// A Setup on `dir/mine.csv` as the file is now.
fn own_copy_setup_as_is(dir: &Path) -> (rung::tui::Setup, std::path::PathBuf) {
    let file = dir.join("mine.csv");
    let setup = setup_with(
        file_targets(&file),
        Some(file.clone()),
        file.clone(),
        false,
        (80, 24),
        true,
    );
    (setup, file)
}

/// The demo saved as the user's own programme takes its settings file along
/// (`<stem>.settings.toml` beside it: README, "Programme settings"), so the
/// next start on the saved file plans the demo's range, site and limits, not
/// the defaults (before: 2026-12-03 to 2029-12-02, today + 36 months); a
/// settings file already beside the save is never written over.
#[test]
fn the_demo_saved_as_ones_own_keeps_its_settings() {
    use rung::programme::{Request, Settings, settings_path};
    let dir = tempfile::tempdir().unwrap();
    let save = dir.path().join("programme.csv");
    let mut s = state_with(
        demo_subset(&["LPO-P01", "LPO-C01"]),
        Some(demo_file()),
        save.clone(),
        true,
        (80, 24),
        false,
    );
    ch(&mut s, 'w');
    assert!(save.exists());
    let written = settings_path(&save);
    assert_eq!(written, dir.path().join("programme.settings.toml"));
    assert_eq!(
        std::fs::read(&written).unwrap(),
        std::fs::read(settings_path(&demo_file())).unwrap()
    );
    // The next start on the saved file: the demo's own settings.
    let st = Settings::resolve(
        &Request {
            programme: Some(save.clone()),
            ..Default::default()
        },
        test_now(),
    )
    .unwrap();
    assert_eq!(st.from.to_string(), "2026-12-01");
    assert_eq!(st.to.to_string(), "2029-05-31");
    assert_eq!(st.site.name, "pampa-lucero");
    assert_eq!(st.limits.min_alt_deg, 30.0);
    // One already there is the user's: kept as written.
    std::fs::write(&written, "[programme]\nto = 2027-06-30\n").unwrap();
    let mut s2 = state_with(
        demo_subset(&["LPO-P01"]),
        Some(demo_file()),
        save.clone(),
        true,
        (80, 24),
        false,
    );
    ch(&mut s2, 'w');
    assert_eq!(
        std::fs::read_to_string(&written).unwrap(),
        "[programme]\nto = 2027-06-30\n"
    );
}
