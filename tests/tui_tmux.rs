//! A scripted terminal run: the `rung` binary in a tmux session, through every
//! view and overlay, then quit (q, Ctrl-C, and a panic), checking each time that
//! the alternate screen was left and the tty is back in canonical mode.
//! Skipped with a message when tmux is not installed.

use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

mod tmux_support;
use tmux_support::Tmux;

fn command(cfg: &Path, extra_env: &str) -> String {
    let bin = env!("CARGO_BIN_EXE_rung");
    // After rung ends, the shell prints a marker, whether the tty is canonical again, and waits.
    format!(
        "RUNG_CONFIG_DIR='{}' RUNG_NOW=2026-12-02T01:00:00Z NO_COLOR=1 {extra_env} '{bin}' tui --date 2026-12-01; \
         echo RUNG-EXIT-$?; stty -a | tr ' ' '\\n' | grep -x -e icanon -e -icanon -e echo -e -echo | tr '\\n' ' '; echo; echo RUNG-TTY-DONE; sleep 120",
        cfg.display()
    )
}

/// Start `rung tui` on the demo programme with `cfg` as its config folder and
/// wait for the Roster; `None` (test skipped) without tmux.
fn open_demo(cfg: &Path) -> Option<Tmux> {
    let t = Tmux::start(&command(cfg, ""))?;
    t.wait_for("Roster · 71 of 71 targets");
    Some(t)
}

/// Remove the first target (d, y) and wait for the unsaved mark.
fn remove_first_target(t: &Tmux) {
    t.send("d");
    t.wait_for("Remove LPO-P01");
    t.send("y");
    t.wait_for("● unsaved");
}

/// Send a signal (`-TERM`, `-INT`) to a process.
fn signal(sig: &str, pid: &str) {
    assert!(
        Command::new("kill")
            .args([sig, pid])
            .status()
            .unwrap()
            .success(),
        "kill {sig} {pid}"
    );
}

fn assert_restored(t: &Tmux, exit: &str) {
    t.wait_for(exit);
    let s = t.wait_for("RUNG-TTY-DONE");
    assert_eq!(t.alternate_on(), "0", "still on the alternate screen:\n{s}");
    assert!(
        !s.contains("Roster ·") && !s.contains("Season ·"),
        "UI left on screen:\n{s}"
    );
    assert!(
        s.contains("icanon echo") || s.contains("icanon") && !s.contains("-icanon"),
        "tty not restored:\n{s}"
    );
    assert!(
        !s.contains("-icanon") && !s.contains("-echo"),
        "raw mode left on:\n{s}"
    );
}

#[test]
fn every_view_then_quit_restores_the_terminal() {
    let cfg = tempfile::tempdir().unwrap();
    let Some(t) = open_demo(cfg.path()) else {
        return;
    };
    assert_eq!(t.alternate_on(), "1");
    t.send("2");
    t.wait_for("Tonight · ◆ LPO-P01 parallax");
    let s = t.wait_for("Sun set");
    assert!(s.contains("90°") && s.contains("┄┄┄"), "{s}");
    t.send("3");
    t.wait_for("Season · hours above 30°");
    t.wait_for("LPO-P01: most");
    t.send("Down");
    t.wait_for("LPO-P02: most");
    t.send("4");
    t.wait_for("Parallax · ◆ LPO-P02");
    // At 80 columns: σϖ with the DCR bias bound and the relative-to-absolute
    // correction named, and the distance line whole to its verdict.
    let s = t.wait_for("σd/d");
    let terms = s.lines().find(|l| l.contains("σϖ")).unwrap_or_default();
    assert!(
        terms.contains("(fit ") && terms.contains(", DCR ") && terms.contains(", abs "),
        "{s}"
    );
    let dist = s.lines().find(|l| l.contains("σd/d")).unwrap_or_default();
    assert!(
        dist.contains(" yr · ")
            && (dist.contains("reachable") || dist.contains("needs") || dist.contains("floor")),
        "{s}"
    );
    t.send("5");
    t.wait_for("the Phase view is for pulsators");
    t.send("6");
    t.wait_for("the Chase view is for transients");
    t.send("End");
    t.wait_for("Chase · ✶ LPO-T2026b");
    t.send("Up");
    t.wait_for("● obs");
    t.send("7");
    t.wait_for("Budget · 2026-12-01 to 2029-05-31");
    t.send("Tab");
    t.wait_for("Now 01:00 UTC");
    t.send("Tab");
    t.wait_for("Ladder · 2026-12-01 to 2029-05-31");
    t.wait_for("End point");
    t.send("Tab");
    t.wait_for("Roster · 71 of 71");
    t.send("BTab");
    t.wait_for("Ladder · 2026-12-01 to");
    t.send("BTab");
    t.wait_for("Now 01:00 UTC");
    t.send("BTab");
    t.wait_for("Budget · 2026-12-01 to");
    t.send("BTab");
    t.wait_for("Chase · ✶ LPO-T2026a");
    t.send("1");
    t.wait_for("Roster · 71 of 71");
    t.send("?");
    t.wait_for("Keys (Esc closes");
    t.send("Escape");
    t.wait_gone("Keys (Esc closes");
    t.send("p");
    t.wait_for("sierra-alcaravan");
    t.send("Escape");
    t.wait_gone("sierra-alcaravan");
    t.send("e");
    t.wait_for("Edit LPO-T2026a");
    t.send("Escape");
    t.wait_gone("Edit LPO-T2026a");
    // Resize: the UI redraws at the new size.
    t.cmd(&["resize-window", "-t", "rung", "-x", "120", "-y", "30"]);
    t.wait_for("trans");
    t.send("q");
    assert_restored(&t, "RUNG-EXIT-0");
}

#[test]
fn ctrl_c_quits_and_restores_the_terminal() {
    let cfg = tempfile::tempdir().unwrap();
    let Some(t) = open_demo(cfg.path()) else {
        return;
    };
    t.send("C-c");
    assert_restored(&t, "RUNG-EXIT-0");
}

#[test]
fn unsaved_changes_are_asked_about_on_ctrl_c() {
    let cfg = tempfile::tempdir().unwrap();
    let Some(t) = open_demo(cfg.path()) else {
        return;
    };
    remove_first_target(&t);
    t.send("C-c");
    t.wait_for("Quit without saving?");
    t.send("n");
    t.wait_gone("Quit without saving?");
    t.send("w");
    t.wait_for("saved /");
    assert!(cfg.path().join("programme.csv").exists());
    t.send("q");
    assert_restored(&t, "RUNG-EXIT-0");
}

#[test]
fn a_panic_restores_the_terminal() {
    let cfg = tempfile::tempdir().unwrap();
    let Some(t) = Tmux::start(&command(cfg.path(), "RUNG_TUI_TEST_PANIC=1")) else {
        return;
    };
    let s = t.wait_for("RUNG-EXIT-101");
    assert!(s.contains("panicking on purpose"), "{s}");
    assert_restored(&t, "RUNG-EXIT-101");
}

#[test]
fn without_a_terminal_rung_prints_tonights_table() {
    let cfg = tempfile::tempdir().unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .env("RUNG_CONFIG_DIR", cfg.path())
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("Night of ") && text.contains("LPO-P01"),
        "{text}"
    );
}

/// The pid of the `rung` process in the pane (the child of the pane's shell).
fn rung_pid(t: &Tmux) -> String {
    let sh = String::from_utf8_lossy(
        &t.cmd(&["display-message", "-p", "-t", "rung", "#{pane_pid}"])
            .stdout,
    )
    .trim()
    .to_string();
    let out = Command::new("ps")
        .args(["-o", "pid=", "--ppid", &sh])
        .output()
        .unwrap();
    let pid = String::from_utf8_lossy(&out.stdout).trim().to_string();
    assert!(
        !pid.is_empty() && !pid.contains('\n'),
        "rung's pid under {sh}: {pid:?}"
    );
    pid
}

#[test]
fn sigterm_and_sigint_from_outside_restore_the_terminal() {
    // POSIX: SIGTERM is 15 and SIGINT is 2; a shell reports 128 + signal (common practice).
    for (sig, code) in [("-TERM", "RUNG-EXIT-143"), ("-INT", "RUNG-EXIT-130")] {
        let cfg = tempfile::tempdir().unwrap();
        let Some(t) = open_demo(cfg.path()) else {
            return;
        };
        assert_eq!(t.alternate_on(), "1");
        let pid = rung_pid(&t);
        signal(sig, &pid);
        let s = t.wait_for(code);
        assert!(s.contains("ended by signal"), "{s}");
        assert_restored(&t, code);
    }
}

#[test]
fn sigterm_keeps_unsaved_edits_and_the_next_start_offers_them() {
    let cfg = tempfile::tempdir().unwrap();
    let Some(t) = open_demo(cfg.path()) else {
        return;
    };
    remove_first_target(&t);
    let recovery = cfg.path().join("programme.csv.unsaved");
    assert!(recovery.exists(), "no {}", recovery.display());
    let pid = rung_pid(&t);
    signal("-TERM", &pid);
    // (The pane is 80 columns wide: join the wrapped lines before looking.)
    let s = t.wait_for("RUNG-EXIT-143").replace('\n', "");
    assert!(
        s.contains("unsaved edits are kept in") && s.contains("programme.csv.unsaved"),
        "{s}"
    );
    assert_restored(&t, "RUNG-EXIT-143");
    drop(t);
    // The next start asks, and "y" brings the 25 targets back as unsaved edits.
    let Some(t) = Tmux::start(&command(cfg.path(), "")) else {
        return;
    };
    t.wait_for("Unsaved edits found");
    t.send("y");
    t.wait_for("Roster · 70 of 70 targets");
    t.wait_for("● unsaved");
    t.send("w");
    t.wait_for("saved /");
    assert!(!recovery.exists());
    t.send("q");
    assert_restored(&t, "RUNG-EXIT-0");
}

#[test]
fn a_vanished_terminal_ends_rung_instead_of_spinning() {
    // Killing the multiplexer closes the terminal without the UI always
    // getting SIGHUP; rung must notice and end (its edits are in the
    // recovery file), not keep reading end-of-file at full CPU.
    let cfg = tempfile::tempdir().unwrap();
    let Some(t) = open_demo(cfg.path()) else {
        return;
    };
    let pid = rung_pid(&t);
    t.cmd(&["kill-server"]);
    let proc_dir = std::path::PathBuf::from(format!("/proc/{pid}"));
    let t0 = Instant::now();
    while proc_dir.exists() {
        if t0.elapsed() > Duration::from_secs(15) {
            let _ = Command::new("kill").args(["-9", &pid]).status();
            panic!("rung {pid} still running 15 s after its terminal closed");
        }
        std::thread::sleep(Duration::from_millis(200));
    }
}

/// Two `rung` processes on one programme (the user's own file), then a third
/// after the second is killed: neither loses or silently undoes the other's
/// edits (src/io/session.rs, src/io/merge.rs; the same key by key in
/// tests/tui_sessions.rs).
#[test]
fn two_sessions_on_one_programme() {
    let cfg = tempfile::tempdir().unwrap();
    let prog = cfg.path().join("programme.csv");
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv"),
        &prog,
    )
    .unwrap();
    let Some(a) = Tmux::start(&command(cfg.path(), "")) else {
        return;
    };
    a.wait_for("Roster · 71 of 71 targets");
    let b = Tmux::start(&command(cfg.path(), "")).unwrap();
    // The second session knows of the first.
    b.wait_for("another rung (process");
    b.wait_for("Roster · 71 of 71 targets");
    remove_first_target(&a);
    b.send("End");
    b.send("d");
    b.wait_for("Remove LPO-T2026b");
    b.send("y");
    b.wait_for("● unsaved");
    let pid_b = rung_pid(&b);
    let (ra, rb) = (
        cfg.path().join("programme.csv.unsaved"),
        cfg.path().join(format!("programme.csv.unsaved-{pid_b}")),
    );
    assert!(ra.exists() && rb.exists());
    // A's save leaves B's unsaved edits where they are.
    a.send("w");
    a.wait_for("saved /");
    assert!(!ra.exists() && rb.exists());
    // B's save merges: both removals are in the file.
    b.send("w");
    b.wait_for("merged with the changes");
    let names = |p: &Path| -> Vec<String> {
        rung::io::targets::load(p)
            .unwrap()
            .targets
            .into_iter()
            .map(|t| t.name)
            .collect()
    };
    let now = names(&prog);
    assert_eq!(now.len(), 69, "{now:?}");
    assert!(!now.contains(&"LPO-P01".to_string()) && !now.contains(&"LPO-T2026b".to_string()));
    // B edits again and is killed (SIGKILL: nothing runs on its way out).
    b.send("d");
    b.wait_for("Remove LPO-");
    b.send("y");
    b.wait_for("● unsaved");
    assert!(rb.exists());
    signal("-KILL", &pid_b);
    b.wait_for("RUNG-EXIT-137");
    assert_eq!(names(&rb).len(), 68);
    // The next session offers B's edits back (A still runs).
    let c = Tmux::start(&command(cfg.path(), "")).unwrap();
    c.wait_for("Unsaved edits found");
    c.send("y");
    c.wait_for("Roster · 68 of 68 targets");
    assert!(!rb.exists(), "B's file is taken over by C's own");
    c.send("w");
    c.wait_for("saved /");
    assert_eq!(names(&prog).len(), 68);
    for t in [&a, &c] {
        t.send("q");
        assert_restored(t, "RUNG-EXIT-0");
    }
    // The first session's lock went with it.
    assert!(!cfg.path().join("programme.csv.lock").exists());
}

/// A killed session's lock (its file left, naming a process that is gone):
/// the next session takes it over with a one-line note, not the warning that
/// the gone process has the programme open (docs/bad-input.md U6).
#[test]
fn a_killed_sessions_lock_is_taken_over() {
    let cfg = tempfile::tempdir().unwrap();
    let prog = cfg.path().join("programme.csv");
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv"),
        &prog,
    )
    .unwrap();
    let before = std::fs::read(&prog).unwrap();
    let mut child = Command::new("true").spawn().unwrap();
    let dead = child.id();
    child.wait().unwrap();
    std::fs::write(cfg.path().join("programme.csv.lock"), format!("{dead}\n")).unwrap();
    let Some(t) = Tmux::start(&command(cfg.path(), "")) else {
        return;
    };
    let s = t.wait_for(&format!(
        "took over the lock left by process {dead}, no longer running"
    ));
    assert!(!s.contains("has ") || !s.contains(" open"), "{s}");
    t.wait_for("Roster · 71 of 71 targets");
    let pid = rung_pid(&t);
    assert_eq!(
        std::fs::read_to_string(cfg.path().join("programme.csv.lock"))
            .unwrap()
            .trim(),
        pid
    );
    t.send("q");
    t.wait_for("RUNG-EXIT-0");
    assert!(!cfg.path().join("programme.csv.lock").exists());
    assert_eq!(std::fs::read(&prog).unwrap(), before, "programme untouched");
}
