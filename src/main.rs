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
    Tui(cli::tui::Args),
    /// Phase coverage of a pulsating star, a visit plan over its phase bins, and its distance precision.
    Phase(Box<cli::phase::Args>),
    /// Chase a fresh thermonuclear supernova: nightly windows, exposures, cadence, distance precision.
    Chase(Box<cli::chase::Args>),
    /// Parallax factors, best epochs, and the precision a schedule buys.
    Parallax(Box<cli::parallax::Args>),
    /// Signal-to-noise of an exposure on a star under tonight's sky.
    Snr(cli::snr::SnrArgs),
    /// Exposure time that reaches a signal-to-noise on a star under tonight's sky.
    Exptime(cli::snr::ExptimeArgs),
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Some(Command::Where(a)) => cli::where_cmd::run(a),
        Some(Command::Night(a)) => cli::night::run(a),
        Some(Command::Tui(a)) => cli::tui::run(a),
        Some(Command::Phase(a)) => cli::phase::run(*a),
        Some(Command::Chase(a)) => cli::chase::run(*a),
        Some(Command::Parallax(a)) => cli::parallax::run(*a),
        Some(Command::Snr(a)) => cli::snr::run_snr(a),
        Some(Command::Exptime(a)) => cli::snr::run_exptime(a),
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
