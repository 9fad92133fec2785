//! A process killed with SIGKILL in the middle of a save leaves the file
//! complete: either the old content or the new one, never a mixture or a
//! truncated file (`rung::io::atomic::write_atomic`: temp file, fsync,
//! rename, fsync of the folder).
//!
//! The test re-invokes its own binary as the child: with `RUNG_SAVE_LOOP`
//! set, the same test function turns into a loop that saves two large
//! versions of one file, alternately, until it is killed.

#![cfg(unix)]

use rung::io::atomic::write_atomic;
use std::io::{BufRead, BufReader, Write};
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

const TEST_NAME: &str = "killed_save_leaves_old_or_new_file";
/// Size of each version: large enough that a write takes many system calls.
const SIZE: usize = 2 * 1024 * 1024;

/// Version `v` of the file: a header naming the version and the length, then
/// a pattern that depends on the version and the position, so that any
/// mixture or truncation is seen.
fn version(v: u8) -> Vec<u8> {
    let mut b = format!("rung-save-test version {v} length {SIZE}\n").into_bytes();
    let mut x: u32 = 0x1234_5678 ^ u32::from(v);
    while b.len() < SIZE {
        x ^= x << 13;
        x ^= x >> 17;
        x ^= x << 5;
        b.push(b'a' + (x % 26) as u8);
    }
    b
}

fn child_loop(path: &Path) -> ! {
    let a = version(1);
    let b = version(2);
    let mut n: u64 = 0;
    loop {
        let which = if n.is_multiple_of(2) { &a } else { &b };
        write_atomic(path, which).expect("save");
        if n == 0 {
            // Tell the parent the loop is running; from here on it may kill.
            println!("saving");
            std::io::stdout().flush().unwrap();
        }
        n += 1;
    }
}

/// Deterministic xorshift for the kill delays.
fn delays(n: usize) -> Vec<u64> {
    let mut x: u64 = 0x2545_F491_4F6C_DD1D;
    (0..n)
        .map(|_| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x % 60
        })
        .collect()
}

#[test]
fn killed_save_leaves_old_or_new_file() {
    if let Ok(p) = std::env::var("RUNG_SAVE_LOOP") {
        child_loop(Path::new(&p));
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plan.json");
    let v0 = b"rung-save-test version 0 (the file before any save)\n".to_vec();
    std::fs::write(&path, &v0).unwrap();
    let v1 = version(1);
    let v2 = version(2);
    let exe = std::env::current_exe().unwrap();
    let mut saw = [0usize; 3];
    for (round, ms) in delays(16).into_iter().enumerate() {
        let mut child = Command::new(&exe)
            .args([TEST_NAME, "--exact", "--nocapture", "--test-threads=1"])
            .env("RUNG_SAVE_LOOP", &path)
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        // Wait until the child has finished its first save and is looping.
        let mut out = BufReader::new(child.stdout.take().unwrap());
        let mut line = String::new();
        while !line.contains("saving") {
            line.clear();
            if out.read_line(&mut line).unwrap() == 0 {
                panic!("the child ended before saving");
            }
        }
        std::thread::sleep(Duration::from_millis(ms));
        child.kill().unwrap(); // SIGKILL on Unix: no destructor, no clean-up runs
        child.wait().unwrap();
        let got = std::fs::read(&path).unwrap();
        let which = if got == v0 {
            0
        } else if got == v1 {
            1
        } else if got == v2 {
            2
        } else {
            panic!(
                "round {round} (killed {ms} ms into the loop): the file is neither version, {} bytes, starts {:?}",
                got.len(),
                String::from_utf8_lossy(&got[..got.len().min(60)])
            );
        };
        saw[which] += 1;
        // Only the killed save's temporary file may be left beside it.
        for e in std::fs::read_dir(dir.path()).unwrap() {
            let name = e.unwrap().file_name().to_string_lossy().into_owned();
            assert!(
                name == "plan.json" || name.starts_with(".plan.json.rung-tmp-"),
                "unexpected file {name}"
            );
        }
    }
    // Every kill came after a completed save, so version 0 is gone for good.
    assert_eq!(saw[0], 0, "{saw:?}");
}
