#!/usr/bin/env bash
# The runtime's test suite under Miri (undefined behaviour, out-of-bounds and uninitialised
# reads, integer overflow in debug), on the pinned nightly (scripts/nightly.sh). Installs its
# `miri` component if it is missing; skips with a clear message (exit 0) when the toolchain or
# the component cannot be had, unless KINGLET_REQUIRE_MIRI=1, when that is an error.
#
# Under Miri the proptest suites run fewer cases (PROPTEST_CASES, default 16 here), and in
# runtime/tests/overflow.rs the 1000- and 16384-input layers are left out (`cfg(miri)`: minutes
# each when interpreted); everything else, the byte-flip and truncation sweeps included, runs as
# in `cargo test`. About 10 minutes on one core.
set -euo pipefail
cd "$(dirname "$0")/.."
skip() {
    echo "miri: SKIPPED: $*"
    if [ "${KINGLET_REQUIRE_MIRI:-0}" = 1 ]; then exit 1; fi
    exit 0
}
command -v rustup >/dev/null || skip "rustup not found"
. scripts/nightly.sh
nightly=$(kinglet_nightly) || skip "no nightly-$KINGLET_NIGHTLY_DATE toolchain (rustup toolchain install nightly-$KINGLET_NIGHTLY_DATE)"
if ! cargo +"$nightly" miri --version >/dev/null 2>&1; then
    rustup +"$nightly" component add miri rust-src \
        || skip "the miri component of $nightly could not be installed"
fi
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-target}/miri"
export PROPTEST_CASES="${PROPTEST_CASES:-16}"
# Proptest's failure persistence writes files, which Miri's isolation forbids; it also needs
# the clock for its time-outs.
export MIRIFLAGS="${MIRIFLAGS:--Zmiri-disable-isolation}"
cargo +"$nightly" miri setup
cargo +"$nightly" miri test -p kinglet-runtime "$@"
