//! Several UI sessions on one programme file: they know of each other and
//! never share an unsaved-edits file.
//!
//! The first session takes a lock, `<file>.lock` (an advisory `flock`,
//! released by the system whatever way the process ends; the file holds the
//! process id for the others to name), and keeps its unsaved edits in
//! `<file>.unsaved`. A session that finds the lock taken keeps its edits in
//! `<file>.unsaved-<pid>`, so that a save by one never removes the edits of
//! another (it used to: both wrote `<file>.unsaved`, and the first save
//! deleted it). At start, a session offers back the unsaved edits of sessions
//! that no longer run: `<file>.unsaved` when it holds the lock, and every
//! `<file>.unsaved-<pid>` whose process is gone. Saves check that the file is
//! still the one the session read and merge when it is not
//! ([`crate::io::merge`]).

use crate::io::atomic::{process_alive, with_suffix};
use std::path::{Path, PathBuf};

/// The lock file of a programme: `<file>.lock`.
pub fn lock_path(programme: &Path) -> PathBuf {
    with_suffix(programme, ".lock")
}

/// This session's hold on a programme.
#[derive(Debug)]
pub struct Claim {
    /// The locked file while this session is the first (released when dropped).
    lock: Option<std::fs::File>,
    lock_path: PathBuf,
    /// The process id of the session that holds the lock, when it is another.
    pub other_pid: Option<u32>,
}

impl Claim {
    /// Take the lock of `programme` if no running session has it. Where locks
    /// cannot be taken (a read-only folder, a system without `flock`) the
    /// session counts as the first: it can coordinate with no one.
    pub fn acquire(programme: &Path) -> Claim {
        let lock_path = lock_path(programme);
        let alone = |lock_path: PathBuf| Claim {
            lock: None,
            lock_path,
            other_pid: None,
        };
        #[cfg(unix)]
        {
            use std::io::{Read, Seek, Write};
            use std::os::fd::AsRawFd;
            use std::os::unix::fs::MetadataExt;
            // A leaving session removes the lock file while it holds it, so a
            // lock taken on a file that is no longer at the path is retried.
            for _ in 0..5 {
                let Ok(mut f) = std::fs::OpenOptions::new()
                    .read(true)
                    .write(true)
                    .create(true)
                    .truncate(false)
                    .open(&lock_path)
                else {
                    return alone(lock_path);
                };
                // SAFETY: flock on a descriptor we own; LOCK_NB never blocks.
                let r = unsafe { libc::flock(f.as_raw_fd(), libc::LOCK_EX | libc::LOCK_NB) };
                if r != 0 {
                    let mut text = String::new();
                    let _ = f.read_to_string(&mut text);
                    return Claim {
                        lock: None,
                        lock_path,
                        other_pid: text.trim().parse().ok().or(Some(0)),
                    };
                }
                let same = match (f.metadata(), std::fs::metadata(&lock_path)) {
                    (Ok(a), Ok(b)) => a.ino() == b.ino() && a.dev() == b.dev(),
                    _ => false,
                };
                if !same {
                    continue;
                }
                let _ = f.set_len(0);
                let _ = f.rewind();
                let _ = writeln!(f, "{}", std::process::id());
                let _ = f.flush();
                return Claim {
                    lock: Some(f),
                    lock_path,
                    other_pid: None,
                };
            }
            alone(lock_path)
        }
        #[cfg(not(unix))]
        {
            alone(lock_path)
        }
    }

    /// Whether another running session holds the programme.
    pub fn shared(&self) -> bool {
        self.other_pid.is_some()
    }

    /// This session's unsaved-edits file for `programme` (saved to there):
    /// `<file>.unsaved` for the first session, `<file>.unsaved-<pid>` for another.
    pub fn recovery_path(&self, programme: &Path) -> PathBuf {
        recovery_path(programme, self.shared().then(std::process::id))
    }
}

impl Drop for Claim {
    /// Remove the lock file while still holding it (a session that opened it
    /// meanwhile sees it gone and tries again), then let the lock go.
    fn drop(&mut self) {
        if self.lock.take().is_some() {
            let _ = std::fs::remove_file(&self.lock_path);
        }
    }
}

/// The unsaved-edits file of a session on `programme`: `<file>.unsaved` for
/// the first session (`instance` `None`), `<file>.unsaved-<pid>` for another.
pub fn recovery_path(programme: &Path, instance: Option<u32>) -> PathBuf {
    match instance {
        None => with_suffix(programme, ".unsaved"),
        Some(pid) => with_suffix(programme, &format!(".unsaved-{pid}")),
    }
}

/// Unsaved-edits files that sessions which no longer run left beside
/// `programme`, newest first: `<file>.unsaved` when `first` (this session
/// holds the lock, so its writer is gone), and every `<file>.unsaved-<pid>`
/// whose process is gone.
pub fn left_recoveries(programme: &Path, first: bool) -> Vec<PathBuf> {
    let mut out: Vec<(std::time::SystemTime, PathBuf)> = Vec::new();
    let when = |p: &Path| {
        std::fs::metadata(p)
            .and_then(|m| m.modified())
            .unwrap_or(std::time::UNIX_EPOCH)
    };
    let main = recovery_path(programme, None);
    if first && main.is_file() {
        out.push((when(&main), main.clone()));
    }
    let Some(name) = main.file_name().map(|n| n.to_string_lossy().into_owned()) else {
        return Vec::new();
    };
    let dir = main
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let prefix = format!("{name}-");
    if let Ok(entries) = std::fs::read_dir(dir) {
        for e in entries.flatten() {
            let f = e.file_name().to_string_lossy().into_owned();
            let Some(pid) = f.strip_prefix(&prefix).and_then(|p| p.parse::<u32>().ok()) else {
                continue;
            };
            if !process_alive(pid) {
                let p = e.path();
                out.push((when(&p), p));
            }
        }
    }
    out.sort_by_key(|x| std::cmp::Reverse(x.0));
    out.into_iter().map(|(_, p)| p).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[cfg(unix)]
    #[test]
    fn the_second_session_finds_the_first() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("programme.csv");
        let first = Claim::acquire(&p);
        assert!(!first.shared());
        assert_eq!(
            first.recovery_path(&p),
            d.path().join("programme.csv.unsaved")
        );
        // A second claim from this process: the lock is per open file, so it
        // is refused like another process's would be.
        let second = Claim::acquire(&p);
        assert_eq!(second.other_pid, Some(std::process::id()));
        assert_eq!(
            second.recovery_path(&p),
            d.path()
                .join(format!("programme.csv.unsaved-{}", std::process::id()))
        );
        drop(second);
        drop(first);
        assert!(
            !lock_path(&p).exists(),
            "the first session removes its lock"
        );
        let again = Claim::acquire(&p);
        assert!(!again.shared());
    }

    #[test]
    fn files_of_gone_sessions_are_offered() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("programme.csv");
        let main = d.path().join("programme.csv.unsaved");
        let gone = d.path().join("programme.csv.unsaved-4194999");
        let running = d
            .path()
            .join(format!("programme.csv.unsaved-{}", std::process::id()));
        for f in [&main, &gone, &running] {
            std::fs::write(f, "name,ra,dec\n").unwrap();
        }
        let mut got = left_recoveries(&p, true);
        got.sort();
        assert_eq!(got, vec![main.clone(), gone.clone()]);
        assert_eq!(left_recoveries(&p, false), vec![gone]);
    }
}
