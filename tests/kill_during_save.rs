//! A process killed with SIGKILL in the middle of a save leaves the file
//! complete: either the old content or the new one, never a mixture or a
//! truncated file (`rung::io::atomic::write_atomic`: temp file, fsync,
//! rename, fsync of the folder); the temporary files of killed saves do not
//! pile up (the next save removes them); a save through a symbolic link
//! writes the file it points to and keeps its mode.
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

/// The temporary files saves of `name` left in `dir`.
fn leftovers(dir: &Path, name: &str) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with(&format!(".{name}.rung-tmp-")))
        .collect()
}

/// Kill a child saving to `save_to` (alternately two versions) `rounds`
/// times, each after a different delay, checking after each kill that `real`
/// (the file the saves end in) is one complete version and that at most the
/// killed child's own temporary file is left in `real`'s folder (the next
/// save removes it); after the loop one more save leaves none. Returns how
/// often each version was found.
fn kill_loop(save_to: &Path, real: &Path, rounds: usize) -> [usize; 3] {
    let v0 = b"rung-save-test version 0 (the file before any save)\n".to_vec();
    let v1 = version(1);
    let v2 = version(2);
    let dir = real.parent().unwrap();
    let name = real.file_name().unwrap().to_string_lossy().into_owned();
    let exe = std::env::current_exe().unwrap();
    let mut saw = [0usize; 3];
    for (round, ms) in delays(rounds).into_iter().enumerate() {
        let mut child = Command::new(&exe)
            .args([TEST_NAME, "--exact", "--nocapture", "--test-threads=1"])
            .env("RUNG_SAVE_LOOP", save_to)
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
        let got = std::fs::read(real).unwrap();
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
        // Only the killed save's temporary file may be left: every save
        // removes those of processes that no longer run, so they never pile up
        // (54 were left after 120 kills before).
        let left = leftovers(dir, &name);
        assert!(left.len() <= 1, "round {round}: {left:?}");
        for e in std::fs::read_dir(dir).unwrap() {
            let n = e.unwrap().file_name().to_string_lossy().into_owned();
            assert!(
                n == name || left.contains(&n),
                "round {round}: unexpected file {n}"
            );
        }
    }
    // The next save (here, in this process) leaves nothing behind.
    write_atomic(save_to, &v1).unwrap();
    assert_eq!(leftovers(dir, &name), Vec::<String>::new());
    assert_eq!(std::fs::read(real).unwrap(), v1);
    saw
}

#[test]
fn killed_save_leaves_old_or_new_file() {
    if let Ok(p) = std::env::var("RUNG_SAVE_LOOP") {
        child_loop(Path::new(&p));
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plan.json");
    std::fs::write(
        &path,
        b"rung-save-test version 0 (the file before any save)\n",
    )
    .unwrap();
    let saw = kill_loop(&path, &path, 24);
    // Every kill came after a completed save, so version 0 is gone for good.
    assert_eq!(saw[0], 0, "{saw:?}");
}

/// The same through a symbolic link to a private file in another folder: the
/// link stays a link, the file it points to gets every save (complete), keeps
/// its mode 600, and the temporary files are made (and swept) beside it.
#[cfg(unix)]
#[test]
fn killed_saves_through_a_link_keep_the_link_and_the_mode() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    let real_dir = dir.path().join("real");
    std::fs::create_dir(&real_dir).unwrap();
    let real = real_dir.join("plan.json");
    std::fs::write(
        &real,
        b"rung-save-test version 0 (the file before any save)\n",
    )
    .unwrap();
    std::fs::set_permissions(&real, std::fs::Permissions::from_mode(0o600)).unwrap();
    let link = dir.path().join("plan.json");
    std::os::unix::fs::symlink("real/plan.json", &link).unwrap();
    let saw = kill_loop(&link, &real, 20);
    assert_eq!(saw[0], 0, "{saw:?}");
    assert!(
        std::fs::symlink_metadata(&link)
            .unwrap()
            .file_type()
            .is_symlink()
    );
    assert_eq!(
        std::fs::metadata(&real).unwrap().permissions().mode() & 0o777,
        0o600
    );
    // Nothing was written beside the link.
    let beside: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    let mut beside = beside;
    beside.sort();
    assert_eq!(beside, vec!["plan.json", "real"]);
}
