//! The tmux harness shared by the terminal tests (tests/tui_tmux.rs,
//! tests/tui_next_tmux.rs): a private tmux server on its own socket, an
//! 80x24 session running one command, keys in, the screen out.

#![allow(dead_code)]

use std::process::Command;
use std::time::{Duration, Instant};

pub struct Tmux {
    sock: std::path::PathBuf,
    _dir: tempfile::TempDir,
}

impl Tmux {
    pub fn start(cmd: &str) -> Option<Tmux> {
        if !Command::new("tmux")
            .arg("-V")
            .output()
            .is_ok_and(|o| o.status.success())
        {
            eprintln!("tmux is not installed: skipping this terminal run");
            return None;
        }
        let dir = tempfile::tempdir().unwrap();
        let sock = dir.path().join("sock");
        let t = Tmux { sock, _dir: dir };
        let ok = t
            .cmd(&[
                "new-session",
                "-d",
                "-s",
                "rung",
                "-x",
                "80",
                "-y",
                "24",
                "sh",
                "-c",
                cmd,
            ])
            .status
            .success();
        assert!(ok, "tmux new-session failed");
        Some(t)
    }
    pub fn cmd(&self, args: &[&str]) -> std::process::Output {
        Command::new("tmux")
            .arg("-S")
            .arg(&self.sock)
            .args(args)
            .output()
            .unwrap()
    }
    pub fn screen(&self) -> String {
        String::from_utf8_lossy(&self.cmd(&["capture-pane", "-p", "-t", "rung"]).stdout).to_string()
    }
    pub fn send(&self, key: &str) {
        self.cmd(&["send-keys", "-t", "rung", key]);
    }
    /// Waits until `needle` is on screen, also when it wraps from one row to
    /// the next: a process killed without restoring the terminal leaves the
    /// cursor wherever its last draw put it, so the shell's next line (for
    /// example `RUNG-EXIT-137`) can start near the right edge and wrap.
    pub fn wait_for(&self, needle: &str) -> String {
        let t0 = Instant::now();
        loop {
            let s = self.screen();
            if s.contains(needle) || s.replace('\n', "").contains(needle) {
                return s;
            }
            assert!(
                t0.elapsed() < Duration::from_secs(90),
                "timed out waiting for {needle:?}; screen:\n{s}"
            );
            std::thread::sleep(Duration::from_millis(100));
        }
    }
    pub fn wait_gone(&self, needle: &str) {
        let t0 = Instant::now();
        while self.screen().contains(needle) {
            assert!(
                t0.elapsed() < Duration::from_secs(30),
                "{needle:?} stays on screen"
            );
            std::thread::sleep(Duration::from_millis(100));
        }
    }
    pub fn alternate_on(&self) -> String {
        String::from_utf8_lossy(
            &self
                .cmd(&["display-message", "-p", "-t", "rung", "#{alternate_on}"])
                .stdout,
        )
        .trim()
        .to_string()
    }
    pub fn rung_pid(&self) -> Option<String> {
        let shell = String::from_utf8_lossy(
            &self
                .cmd(&["display-message", "-p", "-t", "rung", "#{pane_pid}"])
                .stdout,
        )
        .trim()
        .to_string();
        let o = Command::new("pgrep").args(["-P", &shell]).output().ok()?;
        String::from_utf8_lossy(&o.stdout)
            .lines()
            .next()
            .map(|s| s.trim().to_string())
    }
}

impl Drop for Tmux {
    fn drop(&mut self) {
        let _ = self.cmd(&["kill-server"]);
    }
}
