#!/usr/bin/env bash
# Kernel benchmark: exact guest instruction counts of the dense kernels and whole inferences
# under QEMU (Cortex-M4F `mps2-an386`, Cortex-M0 `microbit`), counted by our TCG plugin
# (kernel-bench/plugin/kcount.c) between marker instructions; the on-target bit-exact
# self-check; runtime code size and peak stack. Prints the tables of BENCHMARKS.md.
#
#   bash scripts/kernel-bench.sh          # full run, tables
#   bash scripts/kernel-bench.sh --check  # the same, and fail if a goal regresses (CI)
#
# Needs: qemu-system-arm (Debian 7.2), gcc, the thumbv6m-none-eabi and thumbv7em-none-eabihf
# Rust targets. Everything it builds goes to kernel-bench/target.
set -euo pipefail
cd "$(dirname "$0")/.."
root=$(pwd)
check=""
[ "${1:-}" = "--check" ] && check="--check"

need() { command -v "$1" >/dev/null 2>&1 || { echo "kernel-bench: $1 not found ($2)" >&2; exit 2; }; }
if ! command -v qemu-system-arm >/dev/null 2>&1 && [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null; then
  apt-get update -qq && apt-get install -y -qq qemu-system-arm >/dev/null
fi
need qemu-system-arm "apt-get install qemu-system-arm"
need gcc "apt-get install gcc"
rustup target add thumbv6m-none-eabi thumbv7em-none-eabihf >/dev/null 2>&1 || true

out="$root/kernel-bench/target"
blobs="$out/blobs"
mkdir -p "$blobs"
export CARGO_TERM_COLOR=never

echo "== building the packer, the host tool and the plugin"
cargo build -q --release -p kinglet-converter --bin kinglet
kinglet="${CARGO_TARGET_DIR:-$root/target}/release/kinglet"
(cd kernel-bench && CARGO_TARGET_DIR="$out" cargo build -q --release -p kinglet-kernel-bench-gen)
gen="$out/release/kinglet-kernel-bench-gen"
gcc -shared -fPIC -O2 -Wall -Wextra -Werror -o "$out/kcount.so" kernel-bench/plugin/kcount.c

echo "== blobs: synthetic layers (seeded) and the two examples, packed by kinglet"
"$gen" synth "$blobs"
"$kinglet" pack examples/digits/model.onnx --calibration examples/digits/calibration.csv -o "$blobs/digits.kgl" >/dev/null
"$kinglet" pack examples/vibration/model.onnx --calibration examples/vibration/calibration.csv -o "$blobs/vibration.kgl" >/dev/null
for m in digits vibration; do "$gen" twin "$blobs/$m.kgl" "$blobs/$m.om.kgl"; done

specs=()
for t in m4 m0; do
  case $t in
    m4) triple=thumbv7em-none-eabihf; machine=mps2-an386; cpu=cortex-m4 ;;
    m0) triple=thumbv6m-none-eabi; machine=microbit; cpu=cortex-m0 ;;
  esac
  echo "== $t: building the firmware ($triple, opt-level s) and running it under QEMU ($machine)"
  (cd kernel-bench && KB_BLOBS="$blobs" CARGO_TARGET_DIR="$out" cargo build -q --release -p kinglet-firmware-bench --target $triple)
  # The code-size probes, built on their own so that their runtime's features are not unified
  # with the benchmark's: int8-only, and with the `f32` feature (the default runtime).
  for build in int8 f32; do
    flags=(); [ $build = f32 ] && flags=(--features f32)
    (cd kernel-bench && CARGO_TARGET_DIR="$out/size-$build" cargo build -q --release -p kinglet-size-probe --target $triple "${flags[@]}")
  done
  s8="$out/size-int8/$triple/release"; sf="$out/size-f32/$triple/release"
  elf="$out/$triple/release"
  rm -f "$out/$t.counts"
  timeout 600 qemu-system-arm -machine $machine -cpu $cpu -nographic -monitor none -serial none \
    -semihosting-config enable=on,target=native \
    -plugin "$out/kcount.so,out=$out/$t.counts" -kernel "$elf/bench" > "$out/$t.log" \
    || { echo "kernel-bench: the $t firmware failed:" >&2; tail -5 "$out/$t.log" >&2; exit 1; }
  grep -E "^selfcheck:" "$out/$t.log" | sed "s/^/$t /"
  specs+=("$t:$out/$t.log:$out/$t.counts:$s8/size_base:$sf/size_infer:$s8/size_infer:$s8/size_classify")
done

echo "== results (QEMU $(qemu-system-arm --version | head -1 | sed 's/.*version //'))"
echo
"$gen" report $check "${specs[@]}"
