//! Atomic saves: write a temporary file beside the target, fsync it, rename it
//! over the target, fsync the folder. A crash at any point leaves either the old
//! file or the new one, never a mixture.
//!
//! Three more promises:
//! - **No leftovers that grow.** A process killed between creating its
//!   temporary file and renaming it leaves that file behind. Temporary files
//!   are named `.<file>.rung-tmp-<pid>-<n>`; every save (and the UI's start,
//!   through [`sweep_stale_temps`]) removes those of `<file>` whose process no
//!   longer runs, so at most one per killed process waits for the next save.
//! - **Symbolic links are written through.** Saving to a link replaces the file
//!   the link points to (in that file's folder), and the link stays a link;
//!   it used to be replaced by a regular file while the real file kept its old
//!   content.
//! - **The file keeps its mode** (and its owner and group where the saving
//!   user may set them): a programme kept private with mode 600 stays 600.

use crate::error::{Result, RungError};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// Most symbolic links followed from a path to its file (as the kernel's limit).
const MAX_LINKS: usize = 40;

/// The file a path names once its symbolic links are followed (the path
/// itself when it is not a link). A link to a file that does not exist yet
/// gives that file's path, so the first save creates it where the link points.
pub fn write_target(path: &Path) -> Result<PathBuf> {
    let mut p = path.to_path_buf();
    for _ in 0..MAX_LINKS {
        match std::fs::symlink_metadata(&p) {
            Ok(m) if m.file_type().is_symlink() => {
                let to = std::fs::read_link(&p).map_err(|e| RungError::io(&p, e))?;
                p = if to.is_absolute() {
                    to
                } else {
                    p.parent().unwrap_or(Path::new("")).join(to)
                };
            }
            _ => return Ok(p),
        }
    }
    Err(RungError::invalid(
        "file name",
        format!(
            "{} goes through more than {MAX_LINKS} symbolic links (a loop?)",
            path.display()
        ),
    ))
}

fn folder_of(path: &Path) -> &Path {
    path.parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."))
}

/// Prefix of the temporary files of `name`: `.<name>.rung-tmp-`.
fn temp_prefix(name: &std::ffi::OsStr) -> String {
    format!(".{}.rung-tmp-", name.to_string_lossy())
}

/// Whether process `pid` still runs (on this machine).
pub(crate) fn process_alive(pid: u32) -> bool {
    if pid == std::process::id() {
        return true;
    }
    #[cfg(unix)]
    {
        let Ok(p) = libc::pid_t::try_from(pid) else {
            return false;
        };
        // SAFETY: signal 0 sends nothing; it only asks whether the process exists.
        let r = unsafe { libc::kill(p, 0) };
        let exists = r == 0 || std::io::Error::last_os_error().raw_os_error() == Some(libc::EPERM);
        // A process that has ended but is not yet reaped by its parent (a
        // zombie, state `Z` in /proc/<pid>/stat on Linux) still answers
        // signal 0; it holds no files and runs no more.
        #[cfg(target_os = "linux")]
        if exists
            && let Ok(stat) = std::fs::read_to_string(format!("/proc/{p}/stat"))
            && let Some(rest) = stat.rsplit_once(')').map(|x| x.1)
            && rest.trim_start().starts_with(['Z', 'X'])
        {
            return false;
        }
        exists
    }
    #[cfg(not(unix))]
    {
        true
    }
}

/// Remove the temporary files that saves of `path` (through its links) left
/// when their process was killed: `.<file>.rung-tmp-<pid>-<n>` whose process no
/// longer runs (on other systems than Unix: older than a day). Returns how
/// many were removed; errors are ignored (a file that cannot be removed stays).
pub fn sweep_stale_temps(path: &Path) -> usize {
    let Ok(target) = write_target(path) else {
        return 0;
    };
    let Some(name) = target.file_name() else {
        return 0;
    };
    let prefix = temp_prefix(name);
    let Ok(entries) = std::fs::read_dir(folder_of(&target)) else {
        return 0;
    };
    let mut removed = 0;
    for e in entries.flatten() {
        let file = e.file_name();
        let Some(rest) = file.to_str().and_then(|f| f.strip_prefix(&prefix)) else {
            continue;
        };
        let pid = rest.split('-').next().and_then(|p| p.parse::<u32>().ok());
        let stale = match pid {
            Some(pid) if cfg!(unix) => !process_alive(pid),
            _ => e
                .metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.elapsed().ok())
                .is_some_and(|age| age.as_secs() > 86_400),
        };
        if stale && std::fs::remove_file(e.path()).is_ok() {
            removed += 1;
        }
    }
    removed
}

/// Write `bytes` to `path` atomically (temp file + fsync + rename + fsync of the
/// folder), through symbolic links, keeping the file's mode; stale temporary
/// files of earlier killed saves are removed first (see the module notes).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomic_like(path, bytes, None)
}

/// [`write_atomic`], giving a new file the mode of the file `like` (a backup
/// takes the mode of the file it copies). An existing file keeps its own mode.
pub fn write_atomic_like(path: &Path, bytes: &[u8], like: Option<&Path>) -> Result<()> {
    let target = write_target(path)?;
    let dir = folder_of(&target);
    let name = target.file_name().ok_or_else(|| {
        RungError::invalid("file name", format!("{} names no file", path.display()))
    })?;
    sweep_stale_temps(&target);
    let old_meta = std::fs::metadata(&target)
        .ok()
        .or_else(|| like.and_then(|l| std::fs::metadata(l).ok()));
    // Process id and a per-process counter: two saves of the same file, from
    // two processes or two threads, never share a temporary file.
    static SEQ: AtomicU64 = AtomicU64::new(0);
    let tmp = dir.join(format!(
        "{}{}-{}",
        temp_prefix(name),
        std::process::id(),
        SEQ.fetch_add(1, Ordering::Relaxed)
    ));
    let res = (|| -> std::io::Result<()> {
        let mut f = std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)?;
        if let Some(m) = &old_meta {
            keep_mode_and_owner(&f, m)?;
        }
        f.write_all(bytes)?;
        f.sync_all()?;
        drop(f);
        std::fs::rename(&tmp, &target)?;
        if let Ok(d) = std::fs::File::open(dir) {
            let _ = d.sync_all();
        }
        Ok(())
    })();
    if let Err(e) = res {
        let _ = std::fs::remove_file(&tmp);
        return Err(RungError::io(path, e));
    }
    Ok(())
}

/// Give the new file the old one's permission bits, and its owner and group
/// when the saving user may (a failure there is not an error: the content
/// matters more than the owner).
fn keep_mode_and_owner(f: &std::fs::File, old: &std::fs::Metadata) -> std::io::Result<()> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        let _ = std::os::unix::fs::fchown(f, Some(old.uid()), Some(old.gid()));
    }
    f.set_permissions(old.permissions())
}

/// The backup kept by [`save_with_backup`]: `path` with `.bak` appended
/// (`sites.toml` → `sites.toml.bak`).
pub fn backup_path(path: &Path) -> PathBuf {
    with_suffix(path, ".bak")
}

/// `path` with `suffix` appended to its file name (`a.csv` + `.unsaved` → `a.csv.unsaved`).
pub fn with_suffix(path: &Path, suffix: &str) -> PathBuf {
    let mut s = path.as_os_str().to_owned();
    s.push(suffix);
    PathBuf::from(s)
}

/// Replace the file at `path` with `bytes` atomically, first keeping its
/// previous content (when there is a file) in [`backup_path`]`(path)`, itself
/// written atomically with the file's mode. Use it for files a person edits by
/// hand (site catalogues, plans), so that a save never costs the last version.
/// When the backup cannot be written, `path` is left untouched and the error
/// says why.
pub fn save_with_backup(path: &Path, bytes: &[u8]) -> Result<()> {
    match std::fs::read(path) {
        Ok(old) => write_atomic_like(&backup_path(path), &old, Some(path))?,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
        Err(e) => return Err(RungError::io(path, e)),
    }
    write_atomic(path, bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replaces_whole_file() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("plan.json");
        write_atomic(&p, b"old").unwrap();
        write_atomic(&p, b"new contents").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"new contents");
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 1);
    }

    #[test]
    fn backup_keeps_the_previous_content() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("sites.toml");
        save_with_backup(&p, b"first").unwrap();
        assert!(!backup_path(&p).exists());
        save_with_backup(&p, b"second").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"second");
        assert_eq!(std::fs::read(backup_path(&p)).unwrap(), b"first");
        save_with_backup(&p, b"third").unwrap();
        assert_eq!(std::fs::read(backup_path(&p)).unwrap(), b"second");
    }

    #[cfg(unix)]
    #[test]
    fn links_are_written_through_and_modes_kept() {
        use std::os::unix::fs::PermissionsExt;
        let d = tempfile::tempdir().unwrap();
        let real_dir = d.path().join("real");
        std::fs::create_dir(&real_dir).unwrap();
        let real = real_dir.join("programme.csv");
        std::fs::write(&real, "old").unwrap();
        std::fs::set_permissions(&real, std::fs::Permissions::from_mode(0o600)).unwrap();
        // A relative link, and a link to that link.
        let link = d.path().join("programme.csv");
        std::os::unix::fs::symlink("real/programme.csv", &link).unwrap();
        let link2 = d.path().join("again.csv");
        std::os::unix::fs::symlink(&link, &link2).unwrap();
        save_with_backup(&link2, b"new").unwrap();
        assert!(
            std::fs::symlink_metadata(&link)
                .unwrap()
                .file_type()
                .is_symlink()
        );
        assert!(
            std::fs::symlink_metadata(&link2)
                .unwrap()
                .file_type()
                .is_symlink()
        );
        assert_eq!(std::fs::read(&real).unwrap(), b"new");
        let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o7777;
        assert_eq!(mode(&real), 0o600);
        // The backup sits beside the name saved to, private like the file.
        assert_eq!(std::fs::read(backup_path(&link2)).unwrap(), b"old");
        assert_eq!(mode(&backup_path(&link2)), 0o600);
        // A dangling link: the first save creates the file it points to.
        let dangling = d.path().join("later.csv");
        std::os::unix::fs::symlink("real/later.csv", &dangling).unwrap();
        write_atomic(&dangling, b"first").unwrap();
        assert_eq!(std::fs::read(real_dir.join("later.csv")).unwrap(), b"first");
        // A loop is refused, and nothing is written.
        let a = d.path().join("a");
        let b = d.path().join("b");
        std::os::unix::fs::symlink(&b, &a).unwrap();
        std::os::unix::fs::symlink(&a, &b).unwrap();
        let e = write_atomic(&a, b"x").unwrap_err().to_string();
        assert!(e.contains("more than 40 symbolic links"), "{e}");
    }

    #[test]
    fn stale_temporary_files_are_swept() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("plan.json");
        // Leftovers of a process that no longer runs (pid beyond any real
        // one), of this process, and of another file.
        let dead = d.path().join(".plan.json.rung-tmp-4194999-0");
        let ours = d
            .path()
            .join(format!(".plan.json.rung-tmp-{}-999", std::process::id()));
        let other = d.path().join(".other.json.rung-tmp-4194999-0");
        for f in [&dead, &ours, &other] {
            std::fs::write(f, "partial").unwrap();
        }
        write_atomic(&p, b"saved").unwrap();
        assert!(!dead.exists());
        assert!(ours.exists() && other.exists());
    }
}
