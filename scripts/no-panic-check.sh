#!/usr/bin/env bash
# Proves that no panic can be reached from parsing and inference in a release firmware build.
#
# Builds scripts/no-panic-probe (Model::parse of bytes the optimiser cannot see, then infer and
# infer_traced with f32, i16 and u8 inputs) for thumbv6m-none-eabi (Cortex-M0+, the `asm!` M0
# kernels) and thumbv7em-none-eabihf (Cortex-M4F, DSP kernels) with panic = "abort", LTO and a
# panic handler that loops. Any panic path that survives optimisation keeps a call to a
# core::panicking / slice-index / unwrap / expect symbol in the ELF; the check lists those
# symbols and the functions that call them, and fails if there is any.
#
# --overflow-report also builds with `-C overflow-checks=on` and lists (without failing) where
# the remaining integer-overflow checks sit: the arithmetic whose safety rests on what
# Model::parse proved (see docs/bad-inputs.md, "Panic paths").
set -euo pipefail
cd "$(dirname "$0")/.."
report=0
[ "${1:-}" = "--overflow-report" ] && report=1
sysroot=$(rustc --print sysroot)
host=$(rustc -vV | sed -n 's/^host: //p')
tools="$sysroot/lib/rustlib/$host/bin"
if [ ! -x "$tools/llvm-nm" ]; then
    rustup component add llvm-tools >/dev/null 2>&1 || rustup component add llvm-tools-preview >/dev/null 2>&1 || true
fi
NM="$tools/llvm-nm"; OBJDUMP="$tools/llvm-objdump"
[ -x "$NM" ] || NM=$(command -v llvm-nm) || { echo "no-panic-check: llvm-nm not found" >&2; exit 1; }
[ -x "$OBJDUMP" ] || OBJDUMP=$(command -v llvm-objdump) || { echo "no-panic-check: llvm-objdump not found" >&2; exit 1; }
base="${CARGO_TARGET_DIR:-$PWD/target}"
pattern='core::panicking|panic_bounds_check|slice_index|slice_(start|end)_index|unwrap_failed|expect_failed|assert_failed|rust_begin_unwind|no_panic_probe::panic'

# Prints the functions that call any symbol matching $pattern in ELF $1.
callers() {
    "$OBJDUMP" -d -C --no-show-raw-insn "$1" | awk -v pat="$pattern" '
        /^[0-9a-f]+ <.*>:$/ { fn = $0; sub(/^[0-9a-f]+ </, "", fn); sub(/>:$/, "", fn); next }
        /\tbl?\t/ && $0 ~ pat && fn !~ pat { print "    " fn }' | sort | uniq -c
}

status=0
# Each target twice: the default runtime, and the int8-only one (without its `f32` feature).
for build in default int8-only; do
for target in thumbv6m-none-eabi thumbv7em-none-eabihf; do
    rustup target add "$target" >/dev/null 2>&1 || true
    flags=()
    [ "$build" = int8-only ] && flags=(--no-default-features)
    CARGO_TARGET_DIR="$base/no-panic-$build" cargo build -q --release --manifest-path scripts/no-panic-probe/Cargo.toml --target "$target" "${flags[@]}"
    elf="$base/no-panic-$build/$target/release/kinglet-no-panic-probe"
    found=$("$NM" -C "$elf" | grep -E "$pattern" || true)
    text=$("$tools/llvm-size" "$elf" 2>/dev/null | awk 'NR==2 {print $1}' || echo "?")
    if [ -n "$found" ]; then
        echo "no-panic-check: $target ($build): panic paths reachable from parse/inference:" >&2
        echo "$found" >&2
        echo "  called from:" >&2
        callers "$elf" >&2
        status=1
    else
        echo "no-panic-check: $target ($build): no panic symbol in the release probe (.text $text bytes)"
    fi
    if [ "$report" = 1 ] && [ "$build" = default ]; then
        RUSTFLAGS="-C overflow-checks=on" CARGO_TARGET_DIR="$base/no-panic-ovf" cargo build -q --release \
            --manifest-path scripts/no-panic-probe/Cargo.toml --target "$target"
        echo "  with -C overflow-checks=on, overflow checks remain in:"
        callers "$base/no-panic-ovf/$target/release/kinglet-no-panic-probe"
    fi
done
done
exit $status
