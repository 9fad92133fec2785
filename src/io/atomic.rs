//! Atomic saves: write a temporary file beside the target, fsync it, rename it
//! over the target, fsync the folder. A crash at any point leaves either the old
//! file or the new one, never a mixture.

use crate::error::{Result, RungError};
use std::io::Write;
use std::path::Path;

/// Write `bytes` to `path` atomically (temp file + fsync + rename + fsync of the folder).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path.file_name().ok_or_else(|| {
        RungError::invalid("file name", format!("{} names no file", path.display()))
    })?;
    let tmp = dir.join(format!(
        ".{}.rung-tmp-{}",
        name.to_string_lossy(),
        std::process::id()
    ));
    let res = (|| -> std::io::Result<()> {
        let mut f = std::fs::OpenOptions::new()
            .write(true)
            .create(true)
            .truncate(true)
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
}
