#!/usr/bin/env bash
# The whole rung test suite, with everything it needs, on a fresh machine.
# README.md names this command; .ci/run calls exactly this.
set -euo pipefail
cd "$(dirname "$0")/.."

# tmux drives the terminal-UI test (tests/tui_tmux.rs skips itself without it).
if ! command -v tmux >/dev/null 2>&1; then
    if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
        (apt-get update -qq && apt-get install -y -qq tmux) >/dev/null 2>&1 \
            || echo "scripts/test.sh: could not install tmux; the tmux test will skip itself" >&2
    else
        echo "scripts/test.sh: tmux not found and cannot install it; the tmux test will skip itself" >&2
    fi
fi

# Release optimisation without the release profile's whole-program link,
# which would link each of the suite's test binaries whole (DEVELOPERS.md,
# "Tests").
export CARGO_PROFILE_RELEASE_LTO=false CARGO_PROFILE_RELEASE_CODEGEN_UNITS=16

cargo test --locked --release

# The library builds without the terminal crates (the `tui` feature off): the
# engine alone. In release, so the dependencies built for the tests are reused.
cargo build --locked --release --no-default-features --lib
if cargo tree --locked --no-default-features -e normal | grep -qiE 'ratatui|crossterm|signal-hook'; then
    echo "scripts/test.sh: a terminal crate is built without the tui feature" >&2
    exit 1
fi
