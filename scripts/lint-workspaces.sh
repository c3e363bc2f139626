#!/usr/bin/env bash
# Format and clippy (-D warnings) for the workspaces the root `cargo fmt`/`cargo clippy` do not
# reach: kernel-bench/ (the host harness, and the firmware and size probes on both Cortex-M
# targets), fuzz/ (on the pinned stable toolchain: clippy needs no sanitizer) and
# scripts/no-panic-probe/ (both targets, default and int8-only runtime). firmware-example/ is
# linted by scripts/firmware.sh.
#
# The benchmark firmware embeds the blobs the harness writes (kernel-bench/target/blobs), so run
# scripts/kernel-bench.sh first (CI does).
set -euo pipefail
cd "$(dirname "$0")/.."
base="${CARGO_TARGET_DIR:-$PWD/target}"
targets=(thumbv7em-none-eabihf thumbv6m-none-eabi)
[ -d kernel-bench/target/blobs ] || {
    echo "lint-workspaces: kernel-bench/target/blobs is missing: run bash scripts/kernel-bench.sh first" >&2
    exit 1
}
clippy() { cargo clippy -q "$@" -- -D warnings; }

echo "lint-workspaces: kernel-bench"
(
    cd kernel-bench
    export CARGO_TARGET_DIR="$PWD/target"
    cargo fmt --all --check
    clippy -p kinglet-harness --all-targets
    for t in "${targets[@]}"; do
        clippy -p kinglet-firmware-bench -p kinglet-size-probe --target "$t"
        clippy -p kinglet-size-probe --features f32 --target "$t"
    done
)

echo "lint-workspaces: fuzz"
(cd fuzz && cargo fmt --check && CARGO_TARGET_DIR="$base/lint-fuzz" clippy --all-targets)

echo "lint-workspaces: scripts/no-panic-probe"
(
    cd scripts/no-panic-probe
    export CARGO_TARGET_DIR="$base/lint-no-panic"
    cargo fmt --check
    for t in "${targets[@]}"; do
        clippy --target "$t"
        clippy --target "$t" --no-default-features
    done
)
echo "lint-workspaces: clean"
