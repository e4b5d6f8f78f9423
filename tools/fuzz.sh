#!/usr/bin/env bash
# Runs twistmark's fuzz targets (fuzz/, a cargo-fuzz project outside the main workspace), one
# after the other, each for a bounded time, on one core.
#
#   tools/fuzz.sh [SECONDS_PER_TARGET] [TARGET...]     default: 60 s each; rig stills segment
#                                                      (also: csv, cli)
#
# cargo-fuzz builds with nightly-only -Z flags (sanitizer, coverage). The toolchain here is
# stable, so this script sets RUSTC_BOOTSTRAP=1, which lets stable rustc accept them. That is
# a build-time switch for this fuzz build only; nothing in the product depends on it.
# Install the runner once with:  cargo install cargo-fuzz --locked
#
# A crash leaves its input in fuzz/artifacts/<target>/. Reproduce with
#   RUSTC_BOOTSTRAP=1 cargo fuzz run <target> fuzz/artifacts/<target>/crash-...
# then keep it as a regression test in the normal test suite (tests/it/bad_input.rs).
# CI does not run this script.
set -euo pipefail
cd "$(dirname "$0")/.."

secs="${1:-60}"
shift || true
targets=("$@")
[ ${#targets[@]} -eq 0 ] && targets=(rig stills segment)

if ! cargo fuzz --help >/dev/null 2>&1; then
    echo "error: cargo-fuzz is not installed: run 'cargo install cargo-fuzz --locked'" >&2
    exit 1
fi
export RUSTC_BOOTSTRAP=1
# The cli target runs the real binary (default features); build it unless one is named.
for t in "${targets[@]}"; do
    if [ "$t" = cli ] && [ -z "${TWISTMARK_BIN:-}" ]; then
        cargo build --bin twistmark
        export TWISTMARK_BIN="${CARGO_TARGET_DIR:-target}/debug/twistmark"
    fi
done
status=0
for t in "${targets[@]}"; do
    mkdir -p "fuzz/corpus/$t" "fuzz/artifacts/$t"
    echo "== fuzz target $t for ${secs} s" >&2
    # One worker process (-fork=1), so one core; -ignore_crashes keeps fuzzing for the whole
    # time after a crash, and every crash input still lands in fuzz/artifacts/<target>/.
    before=$(ls "fuzz/artifacts/$t" 2>/dev/null | wc -l)
    if ! cargo fuzz run --fuzz-dir fuzz "$t" "fuzz/corpus/$t" "fuzz/seeds/$t" -- \
        -max_total_time="$secs" -rss_limit_mb=2048 -timeout=20 -print_final_stats=1 \
        -fork=1 -ignore_crashes=1 -ignore_timeouts=1 -ignore_ooms=1; then
        status=1
    fi
    after=$(ls "fuzz/artifacts/$t" 2>/dev/null | wc -l)
    if [ "$after" -gt "$before" ]; then
        echo "== $t: $((after - before)) new crash input(s) in fuzz/artifacts/$t/" >&2
        status=1
    fi
done
exit $status
