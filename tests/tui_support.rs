//! Shared helpers of the UI tests (also compiled on its own, with no tests).
#![allow(dead_code)]

use ratatui::Terminal;
use ratatui::backend::TestBackend;
use rung::astro::time::{Instant, parse_instant};
use rung::io::sites;
use rung::io::targets::{Target, load};
use rung::programme::Settings;
use rung::tui::effects::{open, settle};
use rung::tui::state::{Programme, State};
use rung::tui::theme::Theme;
use rung::tui::{Msg, Setup, draw};
use std::path::{Path, PathBuf};

/// The demo programme file.
pub fn demo_file() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv")
}

/// The demo targets.
pub fn demo_targets() -> Vec<Target> {
    load(&demo_file()).unwrap().targets
}

/// 2026-12-02T01:00:00Z: 22:00 local at the demo site, in the night of 2026-12-01.
pub fn test_now() -> Instant {
    parse_instant("2026-12-02T01:00:00Z").unwrap()
}

/// The demo programme's settings (targets-demo/targets.settings.toml) at
/// [`test_now`]: pampa-lucero, lucero-1m, 2026-12-01 to 2029-05-31, 30°, −12°.
pub fn demo_settings() -> Settings {
    let req = rung::programme::Request {
        programme: Some(demo_file()),
        ..Default::default()
    };
    Settings::resolve(&req, test_now()).unwrap()
}

/// A state on the demo programme, night of 2026-12-01 at pampa-lucero, fully computed.
/// Saves go to `save_path`; `source` is the file the programme came from.
pub fn state_with(
    targets: Vec<Target>,
    source: Option<PathBuf>,
    save_path: PathBuf,
    is_demo: bool,
    size: (u16, u16),
    color: bool,
) -> State {
    open(setup_with(targets, source, save_path, is_demo, size, color))
}

/// The demo targets with these names, in file order.
pub fn demo_subset(names: &[&str]) -> Vec<Target> {
    demo_targets()
        .into_iter()
        .filter(|t| names.contains(&t.name.as_str()))
        .collect()
}

/// A copy of the demo programme as `dir/mine.csv` (the user's own file) and
/// the Setup of a UI opened on it at 80×24.
pub fn own_copy_setup(dir: &Path) -> (Setup, PathBuf) {
    let file = dir.join("mine.csv");
    std::fs::copy(demo_file(), &file).unwrap();
    let setup = setup_with(
        demo_targets(),
        Some(file.clone()),
        file.clone(),
        false,
        (80, 24),
        true,
    );
    (setup, file)
}

/// A state opened on a copy of the demo programme as `dir/mine.csv`; the file's path.
pub fn own_copy_state(dir: &Path) -> (State, PathBuf) {
    let (setup, file) = own_copy_setup(dir);
    (open(setup), file)
}

/// The Setup behind [`state_with`].
pub fn setup_with(
    targets: Vec<Target>,
    source: Option<PathBuf>,
    save_path: PathBuf,
    is_demo: bool,
    size: (u16, u16),
    color: bool,
) -> Setup {
    let original = source.as_ref().and_then(|p| std::fs::read(p).ok());
    Setup {
        sites: sites::catalogue().unwrap(),
        settings: demo_settings(),
        date: Some(chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()),
        now: test_now(),
        targets,
        programme: Programme {
            source,
            save_path: save_path.clone(),
            is_demo,
            refused_rows: 0,
            original: if is_demo { None } else { original },
            layout: None,
            disk: Programme::disk_now(&save_path),
            instance: None,
        },
        size,
        theme: Theme { color },
        message: None,
        instruments: rung::photometry::instrument::catalogue()
            .unwrap()
            .into_iter()
            .map(|i| i.name)
            .collect(),
        recovered: None,
    }
}

/// A fresh programme path of its own for each demo state, in one temporary
/// folder per test binary (edits write the unsaved-edits file beside it).
fn scratch_programme() -> PathBuf {
    static DIR: std::sync::OnceLock<tempfile::TempDir> = std::sync::OnceLock::new();
    static N: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    // Inside cargo's scratch folder for integration tests (target/tmp), never /tmp litter.
    let dir = DIR.get_or_init(|| tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap());
    let n = N.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    dir.path().join(format!("programme-{n}.csv"))
}

/// The demo state; saves and the unsaved-edits file go to a scratch folder.
pub fn demo_state(size: (u16, u16)) -> State {
    state_with(
        demo_targets(),
        Some(demo_file()),
        scratch_programme(),
        true,
        size,
        true,
    )
}

/// Render the state at a size; the buffer's rows as strings.
pub fn screen(s: &State, w: u16, h: u16) -> (Vec<String>, ratatui::buffer::Buffer) {
    let mut term = Terminal::new(TestBackend::new(w, h)).unwrap();
    term.draw(|f| draw(s, f)).unwrap();
    let buf = term.backend().buffer().clone();
    let mut rows = Vec::new();
    for y in 0..h {
        let mut line = String::new();
        for x in 0..w {
            line.push_str(buf[(x, y)].symbol());
        }
        rows.push(line);
    }
    (rows, buf)
}

/// Whether some row contains `needle`.
pub fn has(rows: &[String], needle: &str) -> bool {
    rows.iter().any(|r| r.contains(needle))
}

/// The first row containing `needle`.
pub fn row_of<'a>(rows: &'a [String], needle: &str) -> &'a str {
    rows.iter()
        .find(|r| r.contains(needle))
        .unwrap_or_else(|| panic!("no row with {needle:?} in\n{}", rows.join("\n")))
}

/// Send a key (and run everything it causes).
pub fn key(s: &mut State, code: crossterm::event::KeyCode) {
    settle(
        s,
        Msg::Key(crossterm::event::KeyEvent::new(
            code,
            crossterm::event::KeyModifiers::NONE,
        )),
    );
}

/// Send a character key.
pub fn ch(s: &mut State, c: char) {
    key(s, crossterm::event::KeyCode::Char(c));
}

/// Type text.
pub fn typed(s: &mut State, text: &str) {
    for c in text.chars() {
        ch(s, c);
    }
}
