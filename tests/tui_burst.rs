//! A pasted burst of keys is read whole (#22): the `rung` binary in a pseudo
//! terminal of its own gets 3,000 characters typed into the Roster's filter
//! in one write, then Enter and `?`, and must show the key help. The
//! terminal reader used to take 1,024 bytes and wait for the terminal to
//! signal more: the rest of a burst stayed unread until the next key, so keys
//! acted late (in tmux, 3,000 pasted characters took 40 s) or not at all.

use std::io::{Read, Write};
use std::os::fd::{FromRawFd, OwnedFd};
use std::os::unix::process::CommandExt;
use std::process::{Command, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// Wait until the output holds `needle` (at most `within`); whether it did.
fn wait_for(out: &Mutex<Vec<u8>>, needle: &str, within: Duration) -> bool {
    let t0 = Instant::now();
    while t0.elapsed() < within {
        if String::from_utf8_lossy(&out.lock().unwrap()).contains(needle) {
            return true;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    false
}

#[test]
fn a_pasted_burst_is_read_whole() {
    let (mut master, mut slave) = (0, 0);
    let ws = libc::winsize {
        ws_row: 24,
        ws_col: 80,
        ws_xpixel: 0,
        ws_ypixel: 0,
    };
    // SAFETY: openpty writes two fds into the integers we pass.
    let r = unsafe {
        libc::openpty(
            &mut master,
            &mut slave,
            std::ptr::null_mut(),
            std::ptr::null(),
            &ws,
        )
    };
    assert_eq!(r, 0, "openpty");
    // SAFETY: both fds were just opened for us and are owned here.
    let (master, slave) = unsafe { (OwnedFd::from_raw_fd(master), OwnedFd::from_raw_fd(slave)) };
    let cfg = tempfile::tempdir().unwrap();
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_rung"));
    cmd.args(["tui", "--date", "2026-12-01"])
        .env("RUNG_CONFIG_DIR", cfg.path())
        .env("RUNG_NOW", "2026-12-02T01:00:00Z")
        .env("TERM", "xterm-256color")
        .env("NO_COLOR", "1")
        .stdin(Stdio::from(slave.try_clone().unwrap()))
        .stdout(Stdio::from(slave.try_clone().unwrap()))
        .stderr(Stdio::from(slave));
    // SAFETY: between fork and exec only async-signal-safe calls: a new
    // session whose controlling terminal is the pseudo terminal (stdin).
    unsafe {
        cmd.pre_exec(|| {
            if libc::setsid() < 0 || libc::ioctl(0, libc::TIOCSCTTY as _, 0) < 0 {
                return Err(std::io::Error::last_os_error());
            }
            Ok(())
        });
    }
    let mut child = cmd.spawn().unwrap();
    drop(cmd);
    let out = Arc::new(Mutex::new(Vec::new()));
    let mut reader = std::fs::File::from(master.try_clone().unwrap());
    let sink = out.clone();
    std::thread::spawn(move || {
        let mut buf = [0u8; 65536];
        while let Ok(n) = reader.read(&mut buf) {
            if n == 0 {
                break;
            }
            sink.lock().unwrap().extend_from_slice(&buf[..n]);
        }
    });
    let mut keys = std::fs::File::from(master);
    let shown = (|| {
        if !wait_for(&out, "Roster", Duration::from_secs(60)) {
            return Err("no first screen".to_string());
        }
        keys.write_all(b"/").unwrap();
        if !wait_for(&out, "filter", Duration::from_secs(30)) {
            return Err("the filter did not open".to_string());
        }
        out.lock().unwrap().clear();
        // The burst, Enter (the filter is done) and `?` (the key help), in one write.
        let mut burst = vec![b'x'; 3000];
        burst.extend_from_slice(b"\r?");
        keys.write_all(&burst).unwrap();
        // Before, the help never came: the burst's tail waited for a key
        // that was never pressed. (A bound, not a timing: it comes in well
        // under a second.)
        if !wait_for(&out, "Esc closes", Duration::from_secs(30)) {
            return Err(format!(
                "the key help never came: the burst was not read whole; last output: {:?}",
                String::from_utf8_lossy(&out.lock().unwrap())
                    .chars()
                    .rev()
                    .take(400)
                    .collect::<String>()
            ));
        }
        Ok(())
    })();
    let _ = keys.write_all(b"\x1b");
    std::thread::sleep(Duration::from_millis(200));
    let _ = keys.write_all(b"q");
    let t0 = Instant::now();
    while child.try_wait().unwrap().is_none() && t0.elapsed() < Duration::from_secs(10) {
        std::thread::sleep(Duration::from_millis(50));
    }
    let _ = child.kill();
    let _ = child.wait();
    shown.unwrap();
}
