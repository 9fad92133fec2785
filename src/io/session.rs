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
    /// The process id of the session that holds the lock, when it is another
    /// (0 when the lock names none).
    pub other_pid: Option<u32>,
    /// Whether that holder is out of sight: the lock is held, but the process
    /// it names does not run on this machine (another host or container
    /// sharing the folder, or a process that kept a closed session's
    /// descriptor). Such a lock still counts as another session's.
    pub other_unseen: bool,
    /// The process id named by a lock this session took over because that
    /// process no longer runs (a killed session's lock).
    pub stale_pid: Option<u32>,
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
            other_unseen: false,
            stale_pid: None,
        };
        #[cfg(unix)]
        {
            use std::io::{Read, Seek, Write};
            use std::os::fd::AsRawFd;
            use std::os::unix::fs::MetadataExt;
            // A leaving session removes the lock file while it holds it, so a
            // lock taken on a file that is no longer at the path is retried.
            let mut stale_pid = None;
            let mut waits = 0;
            let mut attempts = 0;
            while attempts < 8 {
                attempts += 1;
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
                let held = r != 0
                    && std::io::Error::last_os_error().raw_os_error() == Some(libc::EWOULDBLOCK);
                if r != 0 {
                    let mut text = String::new();
                    let _ = f.read_to_string(&mut text);
                    let pid: Option<u32> = text.trim().parse().ok();
                    match pid {
                        // A running process holds it: another session.
                        Some(p) if p > 0 && process_alive(p) => {
                            return Claim {
                                lock: None,
                                lock_path,
                                other_pid: Some(p),
                                other_unseen: false,
                                stale_pid: None,
                            };
                        }
                        // Held, and the process it names is gone (or none is
                        // named yet): a session that has just taken it may be
                        // writing its id, so look again a little later.
                        _ if held && waits < 5 => {
                            waits += 1;
                            attempts -= 1;
                            std::thread::sleep(std::time::Duration::from_millis(40));
                            continue;
                        }
                        // Still held, by a process not seen here: a session
                        // on another machine or in another container sharing
                        // the folder (its process ids are not ours), or a
                        // process that kept a closed session's descriptor.
                        // Someone holds it, so this session is the second:
                        // taking it over would give two sessions one
                        // unsaved-edits file.
                        _ if held => {
                            return Claim {
                                lock: None,
                                lock_path,
                                other_pid: Some(pid.unwrap_or(0)),
                                other_unseen: true,
                                stale_pid: None,
                            };
                        }
                        _ if !held && pid.is_none() => {
                            // No lock can be taken here (`flock` refused) and
                            // no session named: count as the first.
                            return alone(lock_path);
                        }
                        _ => {}
                    }
                    // `flock` refused here (a file system without it) and
                    // the lock names a process that no longer runs: the
                    // file itself is the claim, taken over. The programme
                    // file is not touched.
                    stale_pid = stale_pid.or(pid.filter(|p| *p > 0)).or(Some(0));
                    let _ = f.set_len(0);
                    let _ = f.rewind();
                    let _ = writeln!(f, "{}", std::process::id());
                    let _ = f.flush();
                    return Claim {
                        lock: Some(f),
                        lock_path,
                        other_pid: None,
                        other_unseen: false,
                        stale_pid,
                    };
                }
                let same = match (f.metadata(), std::fs::metadata(&lock_path)) {
                    (Ok(a), Ok(b)) => a.ino() == b.ino() && a.dev() == b.dev(),
                    _ => false,
                };
                if !same {
                    continue;
                }
                // A lock file left by a session that was killed (a session
                // that ends removes its own) names a process that is gone.
                if stale_pid.is_none() {
                    let mut text = String::new();
                    let _ = f.read_to_string(&mut text);
                    stale_pid = text
                        .trim()
                        .parse::<u32>()
                        .ok()
                        .filter(|p| *p > 0 && !process_alive(*p));
                }
                let _ = f.set_len(0);
                let _ = f.rewind();
                let _ = writeln!(f, "{}", std::process::id());
                let _ = f.flush();
                return Claim {
                    lock: Some(f),
                    lock_path,
                    other_pid: None,
                    other_unseen: false,
                    stale_pid,
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

    /// A process that has run and ended (reaped): its id names no process.
    #[cfg(unix)]
    fn gone_pid() -> u32 {
        let mut c = std::process::Command::new("true").spawn().unwrap();
        let pid = c.id();
        c.wait().unwrap();
        pid
    }

    /// Hold `path`'s lock through a descriptor of our own, as a process that
    /// kept a killed session's descriptor would.
    #[cfg(unix)]
    fn hold(path: &Path) -> std::fs::File {
        use std::os::fd::AsRawFd;
        let f = std::fs::OpenOptions::new().read(true).open(path).unwrap();
        // SAFETY: flock on a descriptor we own.
        let r = unsafe { libc::flock(f.as_raw_fd(), libc::LOCK_EX | libc::LOCK_NB) };
        assert_eq!(r, 0);
        f
    }

    #[cfg(unix)]
    #[test]
    fn a_killed_sessions_lock_is_taken_over_with_a_note() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("programme.csv");
        std::fs::write(&p, "name,ra,dec\n").unwrap();
        let dead = gone_pid();
        assert!(!process_alive(dead));
        // Left behind, no one holding it (the usual case after a SIGKILL).
        std::fs::write(lock_path(&p), format!("{dead}\n")).unwrap();
        let c = Claim::acquire(&p);
        assert!(!c.shared(), "a gone process's lock is not another session");
        assert_eq!(c.stale_pid, Some(dead));
        assert_eq!(
            std::fs::read_to_string(lock_path(&p)).unwrap().trim(),
            std::process::id().to_string()
        );
        drop(c);
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "name,ra,dec\n");
        // A clean start: no note.
        let c = Claim::acquire(&p);
        assert_eq!((c.shared(), c.stale_pid), (false, None));
    }

    #[cfg(unix)]
    #[test]
    fn a_held_lock_naming_a_process_not_seen_here_is_another_session() {
        // A session on another machine sharing the folder holds the lock; its
        // process id names nothing here (or a descriptor of a closed session
        // was kept by something). Someone holds it: this session is the
        // second, keeps its edits apart, and leaves the lock as it is.
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("programme.csv");
        std::fs::write(&p, "name,ra,dec\n").unwrap();
        let dead = gone_pid();
        std::fs::write(lock_path(&p), format!("{dead}\n")).unwrap();
        let keeper = hold(&lock_path(&p));
        let c = Claim::acquire(&p);
        assert!(c.shared(), "a held lock is another session's");
        assert_eq!((c.other_pid, c.other_unseen), (Some(dead), true));
        assert_eq!(c.stale_pid, None);
        assert!(c.lock.is_none());
        assert_eq!(
            c.recovery_path(&p),
            d.path()
                .join(format!("programme.csv.unsaved-{}", std::process::id()))
        );
        drop(c);
        assert_eq!(
            std::fs::read_to_string(lock_path(&p)).unwrap().trim(),
            dead.to_string(),
            "the holder's lock file is left as it was"
        );
        // Named by no one at all, still held: the same.
        std::fs::write(lock_path(&p), "").unwrap();
        let c = Claim::acquire(&p);
        assert_eq!((c.other_pid, c.other_unseen), (Some(0), true));
        drop(c);
        drop(keeper);
        // Released: this session is the first and takes it over with a note.
        std::fs::write(lock_path(&p), format!("{dead}\n")).unwrap();
        let c = Claim::acquire(&p);
        assert!(!c.shared());
        assert_eq!(c.stale_pid, Some(dead));
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "name,ra,dec\n");
    }

    #[cfg(unix)]
    #[test]
    fn a_running_processs_lock_still_counts() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("programme.csv");
        let mut child = std::process::Command::new("sleep")
            .arg("30")
            .spawn()
            .unwrap();
        std::fs::write(lock_path(&p), format!("{}\n", child.id())).unwrap();
        let keeper = hold(&lock_path(&p));
        let c = Claim::acquire(&p);
        assert_eq!(c.other_pid, Some(child.id()));
        assert!(!c.other_unseen);
        assert_eq!(c.stale_pid, None);
        drop(c);
        drop(keeper);
        let _ = child.kill();
        let _ = child.wait();
    }

    #[cfg(target_os = "linux")]
    #[test]
    fn an_ended_unreaped_process_is_not_running() {
        let mut c = std::process::Command::new("true").spawn().unwrap();
        let pid = c.id();
        // Not waited for: a zombie until reaped.
        let t = std::time::Instant::now();
        while process_alive(pid) && t.elapsed().as_secs() < 10 {
            std::thread::sleep(std::time::Duration::from_millis(20));
        }
        assert!(!process_alive(pid));
        c.wait().unwrap();
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
