//! Subcommands of the `rung` binary and the formatting they share.

pub mod args;
pub mod budget;
pub mod chase;
pub mod ladder;
pub mod next;
pub mod night;
pub mod parallax;
pub mod phase;
pub mod plan;
pub mod season;
pub mod snr;
#[cfg(feature = "tui")]
pub mod tui;
pub mod where_cmd;

use anyhow::Result;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

// The command line (the grammar of every subcommand and option; `main`
// dispatches it). Here rather than in `main.rs` so that the fuzz target of
// the option parsers (`fuzz/src/lib.rs`, `cli_options`) parses with it.

/// rung: plan observations for distance measurements (parallax, pulsators, transients).
#[derive(clap::Parser)]
#[command(name = "rung", version, about, long_about = None)]
pub struct Cli {
    // The subcommand (`rung` alone: the UI on a terminal, else tonight's table).
    #[command(subcommand)]
    pub command: Option<Command>,
}

// The subcommands.
#[derive(clap::Subcommand)]
pub enum Command {
    /// Where a target is at an instant: altitude, azimuth, airmass, Sun and Moon.
    Where(where_cmd::Args),
    /// The night of a date: twilights, Moon, and each target's window.
    Night(night::Args),
    /// The terminal UI: roster, tonight, season (keyboard-driven; ? shows the keys).
    #[cfg(feature = "tui")]
    Tui(tui::Args),
    /// Chase a fresh thermonuclear supernova: nightly windows, exposures, cadence, distance precision.
    Chase(Box<chase::Args>),
    /// Phase coverage of a pulsating star, a visit plan over its phase bins, and its distance precision.
    Phase(Box<phase::Args>),
    /// Parallax factors, best epochs, and the precision a schedule buys.
    Parallax(Box<parallax::Args>),
    /// Place visits on nights for a season; save, mark done or lost, re-plan, export (CSV, JSON, iCalendar, night sheet).
    Plan(Box<plan::PlanArgs>),
    /// What to observe now, ranked: visible targets and tonight's planned visits, with altitude, airmass, Moon, time left and exposure.
    Next(Box<next::Args>),
    /// What each target's distance goal costs (weather, overheads), and which goals the hours asked meet.
    Budget(Box<budget::Args>),
    /// The distance ladder: anchors, host fields, calibrators and Hubble flow in one fit; an end point's error budget by rung and what the next hour buys.
    Ladder(Box<ladder::Args>),
    /// Signal-to-noise of an exposure on a star under tonight's sky.
    Snr(snr::SnrArgs),
    /// Exposure time that reaches a signal-to-noise on a star under tonight's sky.
    Exptime(snr::ExptimeArgs),
    /// Every target on every night of a date range: observable hours, airmass, Moon.
    Season(season::Args),
}

/// Print a line of a table or report through the output layer
/// (`rung::output::table_line`: names cannot drive the terminal, no number is
/// written as `-0.00`): `outln!("...", args)` to standard output,
/// `outln!(writer, "...", args)` to a writer (returns its `io::Result`).
macro_rules! outln {
    () => {
        println!()
    };
    ($fmt:literal $($arg:tt)*) => {
        println!("{}", rung::output::table_line(&format!($fmt $($arg)*)))
    };
    ($w:expr, $fmt:literal $($arg:tt)*) => {
        writeln!($w, "{}", rung::output::table_line(&format!($fmt $($arg)*)))
    };
}
pub(crate) use outln;

/// Print a JSON document through the output layer (`rung::output::json`:
/// pretty, non-finite numbers as `null`, no negative zero).
pub fn print_json<T: serde::Serialize + ?Sized>(v: &T) -> Result<()> {
    println!("{}", rung::output::json(v)?);
    Ok(())
}

/// Set when some input rows were refused; `main` then exits with code 3
/// (the output for the good rows was still produced).
pub static SKIPPED_INPUT: AtomicBool = AtomicBool::new(false);

/// Whether any input row was refused during this run.
pub fn skipped_input() -> bool {
    SKIPPED_INPUT.load(Ordering::Relaxed)
}

/// The error and its causes on one line, with any control character (from a
/// name in a file) shown as an escape (`rung::output::one_line`).
pub fn one_line(e: &anyhow::Error) -> String {
    let mut s = e.to_string();
    for c in e.chain().skip(1) {
        let cs = c.to_string();
        if !s.contains(&cs) {
            s.push_str(": ");
            s.push_str(&cs);
        }
    }
    rung::output::one_line(&s.replace('\n', " ")).into_owned()
}

/// Folder of the demo programme: `$RUNG_DEMO_DIR`, else `targets-demo/` beside
/// the current folder, else the one compiled into this build.
pub fn demo_dir() -> PathBuf {
    if let Ok(d) = std::env::var("RUNG_DEMO_DIR") {
        return PathBuf::from(d);
    }
    let here = PathBuf::from("targets-demo");
    if here.join("targets.csv").exists() {
        return here;
    }
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("targets-demo")
}

/// The demo programme's targets file.
pub fn demo_programme() -> PathBuf {
    demo_dir().join("targets.csv")
}

/// The clock: `$RUNG_NOW` when set (an ISO 8601 instant, so that tests and
/// replays see a fixed clock), else the system clock.
pub fn now() -> Result<rung::astro::time::Instant> {
    match std::env::var("RUNG_NOW") {
        Ok(t) => rung::astro::time::parse_instant(&t).map_err(|e| anyhow::anyhow!("RUNG_NOW: {e}")),
        Err(_) => Ok(rung::astro::time::Instant::now()?),
    }
}

/// An instant option (`--at`, `--now`, `--observed`): absent or `now` is
/// `default` (the clock, or an instant already taken from it), else the ISO
/// 8601 instant given; a bad one is named by `flag`.
pub fn instant_or(
    arg: Option<&str>,
    default: rung::astro::time::Instant,
    flag: &str,
) -> Result<rung::astro::time::Instant> {
    match arg.map(str::trim) {
        None => Ok(default),
        Some(t) if t.eq_ignore_ascii_case("now") => Ok(default),
        Some(t) => rung::astro::time::parse_instant(t)
            .map_err(|e| anyhow::anyhow!(e).context(flag.to_string())),
    }
}

/// The programme settings of a command, resolved once
/// (`rung::programme::Settings::resolve`): the command line's `choices`, then
/// the settings file of `programme` (its targets file), the user's
/// `settings.toml` and the built-in defaults; `method_files` are the method
/// configuration files named on the command line.
pub fn settings(
    choices: rung::programme::Choices,
    programme: Option<&Path>,
    method_files: &[(&str, Option<&PathBuf>)],
) -> Result<rung::programme::Settings> {
    let req = rung::programme::Request {
        cli: choices,
        programme: programme.map(Path::to_path_buf),
        method_files: method_files
            .iter()
            .filter_map(|(k, p)| p.map(|p| (k.to_string(), p.clone())))
            .collect(),
    };
    let st = rung::programme::Settings::resolve(&req, now()?)?;
    // A site whose zone contradicts its longitude (`Site::zone_warning`) is said on stderr.
    if let Some(w) = st.site.zone_warning() {
        eprintln!("rung: warning: {}", rung::output::one_line(&w));
    }
    Ok(st)
}

/// Files smaller than this load without a progress bar.
const PROGRESS_FROM_BYTES: u64 = 8 * 1024 * 1024;

/// At most this many warnings and refused rows of a targets file are printed;
/// the rest are counted in one last line. (200 MB of garbage behind a good
/// header used to print a warning per row: 1.5 million lines, 191 MB on stderr.)
pub const SHOWN_NOTES: usize = 50;

/// Load targets, printing each refused row as a warning on stderr (the good
/// rows load). A large file shows a progress bar on stderr, only when stderr
/// is a terminal (never in pipes, logs or `--json` captures).
pub fn load_targets(path: &Path) -> Result<Vec<rung::io::targets::Target>> {
    load_targets_then(path, &mut |_| {})
}

/// [`load_targets`], showing each good target to `on_each` as it is read
/// (in file order, before the whole file is), so work on it can start.
pub fn load_targets_then(
    path: &Path,
    on_each: &mut dyn FnMut(&rung::io::targets::Target),
) -> Result<Vec<rung::io::targets::Target>> {
    // Room for about as many targets as the file has lines, so the list is
    // not copied as it grows (room not written to costs no memory).
    let size = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    let mut targets = Vec::with_capacity((size / 64).min(1 << 17) as usize);
    stream_targets(path, &mut |t| {
        on_each(&t);
        targets.push(t)
    })?;
    // Links name other rows: checked once every row is read (warnings; the
    // distance ladder refuses what it cannot close).
    let mut notes = Notes::default();
    for w in rung::io::links::check(&targets, path, None) {
        notes.note(&w, false, None);
    }
    notes.finish();
    Ok(targets)
}

/// Read a targets file handing each good target to `on_target` as it is read
/// (a CSV file is never held whole), with [`load_targets`]'s warnings, capped
/// at [`SHOWN_NOTES`] lines and a count, and its progress bar. Returns how many
/// targets were read; a file without a usable target is an error.
pub fn stream_targets(
    path: &Path,
    on_target: &mut dyn FnMut(rung::io::targets::Target),
) -> Result<usize> {
    use std::io::IsTerminal;
    let size = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    let bar = (size >= PROGRESS_FROM_BYTES && std::io::stderr().is_terminal()).then(|| {
        let b = indicatif::ProgressBar::with_draw_target(
            Some(size),
            indicatif::ProgressDrawTarget::stderr(),
        );
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "reading targets {bar:30} {bytes}/{total_bytes} ({eta} left)",
        ) {
            b.set_style(style);
        }
        b
    });
    let notes = std::cell::RefCell::new(Notes::default());
    let mut count = 0usize;
    let r = rung::io::targets::stream(
        path,
        &mut |t| {
            count += 1;
            on_target(t);
        },
        &mut |p| notes.borrow_mut().note(&p, true, bar.as_ref()),
        &mut |w| notes.borrow_mut().note(&w, false, bar.as_ref()),
        &mut |read, total| {
            if let Some(b) = &bar {
                b.set_length(total);
                b.set_position(read);
            }
        },
    );
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    r?;
    notes.into_inner().finish();
    if count == 0 {
        anyhow::bail!("{}: no usable targets", path.display());
    }
    Ok(count)
}

/// The warnings and refused rows of one targets file: the first
/// [`SHOWN_NOTES`] printed as they come (on one line each, through the output
/// layer), the others only counted.
#[derive(Default)]
struct Notes {
    shown: usize,
    more_rows: u64,
    more_warnings: u64,
}

impl Notes {
    fn note(&mut self, e: &rung::RungError, row: bool, bar: Option<&indicatif::ProgressBar>) {
        if row {
            SKIPPED_INPUT.store(true, Ordering::Relaxed);
        }
        if self.shown >= SHOWN_NOTES {
            *if row {
                &mut self.more_rows
            } else {
                &mut self.more_warnings
            } += 1;
            return;
        }
        self.shown += 1;
        let text = e.to_string();
        let text = rung::output::one_line(&text);
        let line = if row {
            format!("rung: warning: {text} (row skipped)")
        } else {
            format!("rung: warning: {text}")
        };
        match bar {
            Some(b) => b.suspend(|| eprintln!("{line}")),
            None => eprintln!("{line}"),
        }
    }

    /// The count of what was not printed, in one line.
    fn finish(self) {
        let mut parts = Vec::new();
        if self.more_rows > 0 {
            parts.push(format!("{} more rows skipped", grouped(self.more_rows)));
        }
        if self.more_warnings > 0 {
            parts.push(format!("{} more warnings", grouped(self.more_warnings)));
        }
        if !parts.is_empty() {
            eprintln!(
                "rung: warning: and {} (not shown: only the first {SHOWN_NOTES} are printed)",
                parts.join(" and ")
            );
        }
    }
}

/// A count with thousands separated by commas: 1520144 → `1,520,144`.
pub fn grouped(n: u64) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, ch) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

/// A target by name from `file`, or from the demo programme when no file is
/// given. The name must match exactly, case included; a name that differs
/// only in case is offered as a hint, never taken silently.
pub fn target_by_name(file: &Option<PathBuf>, name: &str) -> Result<rung::io::targets::Target> {
    let file = file.clone().unwrap_or_else(demo_programme);
    let ts = load_targets(&file)?;
    Ok(rung::io::targets::find_by_name(ts, name, &file)?)
}

/// `rung` with no subcommand: the terminal UI when stdout is a terminal (in
/// a build with the `tui` feature), else tonight's plan for the demo
/// programme as a table (so scripts keep working).
pub fn default_run() -> Result<()> {
    #[cfg(feature = "tui")]
    if std::io::IsTerminal::is_terminal(&std::io::stdout()) {
        return tui::run(tui::Args::default());
    }
    night::run(night::Args {
        site: args::SiteArg::default(),
        date: None,
        targets: Some(demo_programme()),
        limits: args::WindowLimits::default(),
        json: false,
    })
}

/// Format an optional number with a fixed number of decimals, or "-" when it
/// has no finite value (`rung::output::num`).
pub fn opt(v: Option<f64>, dp: usize) -> String {
    rung::output::num(v, dp)
}

/// A path as the user should read it in a message: absolute (the working
/// folder joined to a relative path; symbolic links left as they are).
pub fn full_path(p: &Path) -> PathBuf {
    std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf())
}

/// Local clock time (HH:MM) of an instant at a site, or "-".
pub fn local_hm(t: Option<rung::astro::time::Instant>, site: &rung::astro::site::Site) -> String {
    t.map(|t| rung::output::clock_hm(t, &site.timezone))
        .unwrap_or_else(|| "-".into())
}

/// UTC clock time (HH:MM) of an instant, or "-".
pub fn utc_hm(t: Option<rung::astro::time::Instant>) -> String {
    t.map(|t| rung::output::clock_hm(t, &chrono::Utc))
        .unwrap_or_else(|| "-".into())
}

#[cfg(test)]
mod tests {
    #[test]
    fn counts_are_grouped_by_thousands() {
        let g = |n| super::grouped(n);
        assert_eq!(g(0), "0");
        assert_eq!(g(999), "999");
        assert_eq!(g(1000), "1,000");
        assert_eq!(g(1_520_144), "1,520,144");
        assert_eq!(g(12_345_678_901), "12,345,678,901");
    }
}
