//! The `rung` command line: argument parsing and dispatch only. Each
//! subcommand lives in `src/cli/` as a small function that builds inputs, calls
//! the library, and formats the result (table, `--json`, `--csv`).

mod cli;

use clap::{Parser, Subcommand};
use std::process::ExitCode;

/// rung: plan observations for distance measurements (parallax, pulsators, transients).
#[derive(Parser)]
#[command(name = "rung", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
}

#[derive(Subcommand)]
enum Command {
    /// Where a target is at an instant: altitude, azimuth, airmass, Sun and Moon.
    Where(cli::where_cmd::Args),
    /// The night of a date: twilights, Moon, and each target's window.
    Night(cli::night::Args),
    /// The terminal UI: roster, tonight, season (keyboard-driven; ? shows the keys).
    #[cfg(feature = "tui")]
    Tui(cli::tui::Args),
    /// Chase a fresh thermonuclear supernova: nightly windows, exposures, cadence, distance precision.
    Chase(Box<cli::chase::Args>),
    /// Phase coverage of a pulsating star, a visit plan over its phase bins, and its distance precision.
    Phase(Box<cli::phase::Args>),
    /// Parallax factors, best epochs, and the precision a schedule buys.
    Parallax(Box<cli::parallax::Args>),
    /// Place visits on nights for a season; save, mark done or lost, re-plan, export (CSV, JSON, iCalendar, night sheet).
    Plan(Box<cli::plan::PlanArgs>),
    /// What each target's distance goal costs (weather, overheads), and which goals the hours asked meet.
    Budget(Box<cli::budget::Args>),
    /// Signal-to-noise of an exposure on a star under tonight's sky.
    Snr(cli::snr::SnrArgs),
    /// Exposure time that reaches a signal-to-noise on a star under tonight's sky.
    Exptime(cli::snr::ExptimeArgs),
    /// Every target on every night of a date range: observable hours, airmass, Moon.
    Season(cli::season::Args),
}

fn main() -> ExitCode {
    // Die quietly like other Unix tools when the reader of stdout goes away
    // (`rung season ... | head`), instead of panicking on a broken pipe.
    #[cfg(unix)]
    // SAFETY: restoring the default SIGPIPE disposition before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    let cli = Cli::parse();
    let result = match cli.command {
        Some(Command::Where(a)) => cli::where_cmd::run(a),
        Some(Command::Night(a)) => cli::night::run(a),
        #[cfg(feature = "tui")]
        Some(Command::Tui(a)) => cli::tui::run(a),
        Some(Command::Chase(a)) => cli::chase::run(*a),
        Some(Command::Phase(a)) => cli::phase::run(*a),
        Some(Command::Parallax(a)) => cli::parallax::run(*a),
        Some(Command::Plan(a)) => cli::plan::run_plan(*a),
        Some(Command::Budget(a)) => cli::budget::run(*a),
        Some(Command::Snr(a)) => cli::snr::run_snr(a),
        Some(Command::Exptime(a)) => cli::snr::run_exptime(a),
        Some(Command::Season(a)) => cli::season::run(a),
        None => cli::default_run(),
    };
    match result {
        Ok(()) if cli::skipped_input() => ExitCode::from(3),
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("rung: error: {}", cli::one_line(&e));
            ExitCode::from(2)
        }
    }
}
