//! The command line is a contract (DESIGN.md, "The machine interface"): every
//! flag's name, default and help text as `rung <command> --help` prints them.
//! `tests/cli_help/<command>.txt` holds that output as it stood when the shared
//! argument blocks (`src/cli/args.rs`) were introduced; a change to a flag must
//! change the snapshot too, in the same commit, on purpose.
//!
//! clap is built without its `wrap_help` feature, so the layout does not depend
//! on the width of the terminal running the tests.

use std::path::Path;
use std::process::Command;

const COMMANDS: [&str; 13] = [
    "where", "night", "season", "snr", "exptime", "plan", "budget", "parallax", "phase", "chase",
    "tui", "next", "ladder",
];

fn help(args: &[&str]) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .output()
        .expect("run the rung binary");
    assert!(
        o.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8(o.stdout).expect("help is UTF-8")
}

fn snapshot(name: &str) -> String {
    let p = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/cli_help")
        .join(format!("{name}.txt"));
    std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

#[test]
fn every_subcommand_help_matches_its_snapshot() {
    for c in COMMANDS {
        let now = help(&[c, "--help"]);
        let want = snapshot(c);
        if now != want {
            let first = now
                .lines()
                .zip(want.lines())
                .position(|(a, b)| a != b)
                .unwrap_or(now.lines().count().min(want.lines().count()));
            panic!(
                "`rung {c} --help` differs from tests/cli_help/{c}.txt from line {}:\nnow:  {:?}\nwant: {:?}",
                first + 1,
                now.lines().nth(first),
                want.lines().nth(first)
            );
        }
    }
}

#[test]
fn top_level_help_matches_its_snapshot() {
    assert_eq!(help(&["--help"]), snapshot("rung"));
}
