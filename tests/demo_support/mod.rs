//! A lean programme cut from the demo's targets file: its comment lines,
//! its header and the rows named, written into a folder of the test's.
//! Shared by the test binaries that budget a few demo targets
//! (`mod demo_support;` in each).

use std::path::{Path, PathBuf};

/// Writes `dir/file` with the demo file's comments, header and the rows of
/// `names` (in the demo's order), and returns its path.
pub fn demo_subset(dir: &Path, file: &str, names: &[&str]) -> PathBuf {
    let demo = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv"),
    )
    .unwrap();
    let keep: Vec<&str> = demo
        .lines()
        .filter(|l| {
            l.starts_with('#')
                || l.starts_with("name,")
                || names.iter().any(|n| l.starts_with(&format!("{n},")))
        })
        .collect();
    let path = dir.join(file);
    std::fs::write(&path, keep.join("\n") + "\n").unwrap();
    path
}
