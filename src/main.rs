//! The `rung` command line: argument parsing and dispatch only. Each
//! subcommand lives in `src/cli/` as a small function that builds inputs, calls
//! the library, and formats the result (table, `--json`, `--csv`).

mod cli;

use clap::Parser;
use cli::{Cli, Command};
use std::process::ExitCode;

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
        Some(Command::Next(a)) => cli::next::run(*a),
        Some(Command::Budget(a)) => cli::budget::run(*a),
        Some(Command::Ladder(a)) => cli::ladder::run(*a),
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
