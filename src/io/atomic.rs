//! Atomic saves: write a temporary file beside the target, fsync it, rename it
//! over the target, fsync the folder. A crash at any point leaves either the old
//! file or the new one, never a mixture.

use crate::error::{Result, RungError};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// Write `bytes` to `path` atomically (temp file + fsync + rename + fsync of the folder).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path.file_name().ok_or_else(|| {
        RungError::invalid("file name", format!("{} names no file", path.display()))
    })?;
    // Process id and a per-process counter: two saves of the same file, from
    // two processes or two threads, never share a temporary file.
    static SEQ: AtomicU64 = AtomicU64::new(0);
    let tmp = dir.join(format!(
        ".{}.rung-tmp-{}-{}",
        name.to_string_lossy(),
        std::process::id(),
        SEQ.fetch_add(1, Ordering::Relaxed)
    ));
    let res = (|| -> std::io::Result<()> {
        let mut f = std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        drop(f);
        std::fs::rename(&tmp, path)?;
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
/// written atomically. Use it for files a person edits by hand (site
/// catalogues, plans), so that a save never costs the last version. When the
/// backup cannot be written, `path` is left untouched and the error says why.
pub fn save_with_backup(path: &Path, bytes: &[u8]) -> Result<()> {
    match std::fs::read(path) {
        Ok(old) => write_atomic(&backup_path(path), &old)?,
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
}
