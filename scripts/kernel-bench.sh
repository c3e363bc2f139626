#!/usr/bin/env bash
# Every published measurement, from one run of the measurement harness (kernel-bench/harness):
# exact guest instruction counts of the dense kernels and whole inferences under QEMU
# (Cortex-M4F `mps2-an386`, Cortex-M0 `microbit`, our TCG plugin kernel-bench/plugin/kcount.c),
# the on-target bit-exact self-check, runtime code size, and stack (the deeper of painting and
# the lowest stack pointer of a QEMU register trace). The harness renders the tables of
# BENCHMARKS.md, converter/src/fit/measured.rs and the rates of converter/src/report/cycles.rs.
#
#   bash scripts/kernel-bench.sh          # measure, print the tables, say what is out of date
#   bash scripts/kernel-bench.sh --check  # the same; fail on a goal regression or on any
#                                         # consumer that disagrees with the run (CI)
#   bash scripts/kernel-bench.sh --write  # the same; write the three consumers
#
# Needs: qemu-system-arm (Debian 7.2; installed here when missing and run as root), gcc, the
# thumbv6m-none-eabi and thumbv7em-none-eabihf Rust targets. The benchmark builds into
# kernel-bench/target, the example firmware's probes into FW_TARGET_DIR or
# firmware-example/target (shared with scripts/firmware.sh), the packer into CARGO_TARGET_DIR
# or target.
set -euo pipefail
cd "$(dirname "$0")/.."
case "${1:-}" in
  ""|--check|--write) ;;
  *) echo "usage: bash scripts/kernel-bench.sh [--check | --write]" >&2; exit 2 ;;
esac

need() { command -v "$1" >/dev/null 2>&1 || { echo "kernel-bench: $1 not found ($2)" >&2; exit 2; }; }
if ! command -v qemu-system-arm >/dev/null 2>&1 && [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq qemu-system-arm >/dev/null
fi
need qemu-system-arm "apt-get install qemu-system-arm"
need gcc "apt-get install gcc"
rustup target add thumbv6m-none-eabi thumbv7em-none-eabihf >/dev/null 2>&1 || true

echo "== building the harness"
(cd kernel-bench && CARGO_TARGET_DIR="$PWD/target" CARGO_TERM_COLOR=never cargo build -q --release -p kinglet-harness)
exec kernel-bench/target/release/kb-harness "$@"
