#!/usr/bin/env bash
# A short, time-boxed run of every fuzz target in fuzz/ (libFuzzer through cargo-fuzz), from the
# committed seeds: catches a regression that makes a target crash on known-good or near-good
# inputs. Needs the pinned nightly (scripts/nightly.sh) and cargo-fuzz; says SKIPPED and exits 0
# without them
# (KINGLET_FUZZ_INSTALL=1 installs cargo-fuzz first; KINGLET_REQUIRE_FUZZ=1 makes a skip an error).
#
#   scripts/fuzz-smoke.sh [SECONDS_PER_TARGET]    (default 10; env FUZZ_SECONDS as well)
#
# Built without AddressSanitizer (the code under test is safe Rust; a panic, an overflow caught
# by debug assertions, a time-out or a memory blow-up is what a smoke run looks for) so that the
# build fits in CI's budget. Long campaigns: see fuzz/README.md.
set -euo pipefail
cd "$(dirname "$0")/.."
secs="${1:-${FUZZ_SECONDS:-10}}"
targets=(blob_infer blob_mutate onnx_import plain_import dataset_load)
skip() {
    echo "fuzz-smoke: SKIPPED: $*"
    if [ "${KINGLET_REQUIRE_FUZZ:-0}" = 1 ]; then exit 1; fi
    exit 0
}
command -v rustup >/dev/null || skip "rustup not found"
. scripts/nightly.sh
nightly=$(kinglet_nightly) || skip "no nightly-$KINGLET_NIGHTLY_DATE toolchain (rustup toolchain install nightly-$KINGLET_NIGHTLY_DATE)"
echo "fuzz-smoke: $(rustc +"$nightly" -V)"
if ! cargo +"$nightly" fuzz --version >/dev/null 2>&1; then
    if [ "${KINGLET_FUZZ_INSTALL:-0}" = 1 ]; then
        cargo install cargo-fuzz --locked
    else
        skip "cargo-fuzz not installed (cargo install cargo-fuzz --locked, or KINGLET_FUZZ_INSTALL=1)"
    fi
fi
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$PWD/target}/fuzz"
start=$(date +%s)
( cd fuzz && cargo +"$nightly" fuzz build --sanitizer none --debug-assertions )
echo "fuzz-smoke: built ${#targets[@]} targets in $(( $(date +%s) - start )) s"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
status=0
for t in "${targets[@]}"; do
    mkdir -p "$work/$t"
    log="$work/$t.log"
    if ( cd fuzz && cargo +"$nightly" fuzz run --sanitizer none --debug-assertions "$t" "$work/$t" "seeds/$t" -- \
            -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 \
            -artifact_prefix="$work/" ) >"$log" 2>&1; then
        runs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -1)
        cov=$(grep -oE 'cov: [0-9]+ ft: [0-9]+' "$log" | tail -1)
        echo "fuzz-smoke: $t: ${runs:-?} runs in ${secs} s, $cov, no failure"
    else
        echo "fuzz-smoke: $t: FAILED" >&2
        grep -E 'panicked|ERROR|SUMMARY|Failing input|Base64' "$log" | head -20 >&2 || tail -30 "$log" >&2
        for a in "$work"/crash-* "$work"/oom-* "$work"/timeout-* "$work"/slow-unit-*; do
            [ -e "$a" ] || continue
            mkdir -p fuzz/artifacts/"$t" && cp "$a" fuzz/artifacts/"$t"/ && echo "  input kept: fuzz/artifacts/$t/$(basename "$a")" >&2
        done
        status=1
    fi
done
echo "fuzz-smoke: total $(( $(date +%s) - start )) s"
exit $status
