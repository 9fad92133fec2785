#!/usr/bin/env bash
# Run every cargo-fuzz target of rung for a few seconds each (libFuzzer in
# one process, no -jobs/-workers), starting from the committed seeds. Exits non-zero when a target
# crashes; the crashing input is left in fuzz/artifacts/<target>/.
#
#   scripts/fuzz-smoke.sh            # 10 s per target
#   FUZZ_SECONDS=300 scripts/fuzz-smoke.sh targets_csv   # one target, longer
#
# Needs cargo-fuzz (cargo install cargo-fuzz) and a nightly toolchain; with
# no nightly, RUNG_FUZZ_TOOLCHAIN=stable uses RUSTC_BOOTSTRAP=1 on stable
# (see docs/fuzzing.md). Without cargo-fuzz it says so and exits 0: the
# smoke mode inside `cargo test` (tests/fuzz_smoke.rs) still covers the
# same harnesses.
set -euo pipefail
cd "$(dirname "$0")/.."

seconds="${FUZZ_SECONDS:-10}"
toolchain="${RUNG_FUZZ_TOOLCHAIN:-nightly}"

if ! cargo fuzz --help >/dev/null 2>&1; then
    echo "fuzz-smoke: cargo-fuzz is not installed (cargo install cargo-fuzz); skipped"
    exit 0
fi

if [ "$toolchain" = stable ]; then
    run() { RUSTC_BOOTSTRAP=1 cargo fuzz "$@"; }
else
    run() { cargo "+$toolchain" fuzz "$@"; }
fi

if [ "$#" -gt 0 ]; then
    targets=("$@")
else
    mapfile -t targets < <(run list)
fi

for t in "${targets[@]}"; do
    work="fuzz/target/smoke-corpus/$t"
    mkdir -p "$work"
    echo "fuzz-smoke: $t for ${seconds}s"
    # New inputs go to a scratch folder; the committed seeds stay as they are.
    run run "$t" "$work" "fuzz/corpus/$t" -- \
        -max_total_time="$seconds" -max_len=65536 \
        -rss_limit_mb=1024 -print_final_stats=1 2>&1 | tail -n 12
done
echo "fuzz-smoke: all targets ran without a crash"
