#!/usr/bin/env bash
# Firmware example under QEMU, on Cortex-M4F (mps2-an386) and Cortex-M0 (microbit).
#
#   bash scripts/firmware.sh                  everything below; exits non-zero on any failure
#   bash scripts/firmware.sh --write-measured the same as `bash scripts/kernel-bench.sh --write`
#                                             (the measurement harness writes measured.rs)
#
# 1. host: unit tests of the firmware's no_std crates (features, KLA-3 driver, vectors) and the
#    host side of the bit-exact vectors (tests/tests/firmware_vectors.rs);
# 2. the committed assets in firmware-example/models/ are what regenerate.sh makes now;
# 3. per target: build, then run under QEMU: selftest (kernel tests, must report 0 failed),
#    vectors (every line must equal tests/fixtures/vectors/*.txt, bit for bit), classify (the
#    demo), fault_check (a fault must fail the run at once);
# 4. the flash and RAM of the binaries per target (the runtime's own code size and stack, and
#    converter/src/fit/measured.rs, are the measurement harness's: scripts/kernel-bench.sh);
# 5. the build-time model budget: passes as configured, fails with a clear message when
#    KINGLET_RAM_BUDGET / KINGLET_FLASH_BUDGET are set too small; the defmt feature builds;
# 6. your own model, step by step (README): scripts/firmware-own-model.sh on both QEMU targets;
# 7. the development boards (Raspberry Pi Pico, micro:bit v2; boards.toml): their release builds
#    of classify, vectors and selftest, with the boot block and vector table where the board's
#    boot ROM looks. They are built only: CI has no board or probe to flash one.
#
# Installs qemu-system-arm (apt-get) and the two rustup targets if they are missing.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
fw="$root/firmware-example"
if [[ "${1:-}" == "--write-measured" ]]; then
  exec bash "$root/scripts/kernel-bench.sh" --write
fi
targets=(thumbv7em-none-eabihf thumbv6m-none-eabi)
host="$(rustc -vV | sed -n 's/^host: //p')"
# The firmware workspace has its own target directory (firmware-example/target) unless
# FW_TARGET_DIR says otherwise; the root workspace keeps CARGO_TARGET_DIR / target.
fw_target="${FW_TARGET_DIR:-$fw/target}"
root_target="${CARGO_TARGET_DIR:-$root/target}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
failures=0
fail() { echo "FAIL: $*"; failures=$((failures + 1)); }
step() { printf '\n---- firmware: %s (at %d s) ----\n' "$*" "$SECONDS"; }
fwcargo() { (cd "$fw" && CARGO_TARGET_DIR="$fw_target" cargo "$@"); }

step "prerequisites"
if ! command -v qemu-system-arm >/dev/null; then
  if [[ $(id -u) -eq 0 ]] && command -v apt-get >/dev/null; then
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq qemu-system-arm >/dev/null
  else
    echo "qemu-system-arm is missing (Debian: apt-get install qemu-system-arm)"; exit 1
  fi
fi
rustup target add "${targets[@]}" >/dev/null 2>&1 || true
qemu-system-arm --version | head -1

step "host tests of the firmware crates"
fwcargo test -q --target "$host" -p kinglet-vibration-features -p kinglet-fw-sensor -p kinglet-fw-vectors
(cd "$root" && cargo test -q -p kinglet-tests --test firmware_vectors)

step "committed assets are current"
(cd "$root" && cargo build -q --release -p kinglet-converter --bin kinglet)
KINGLET="$root_target/release/kinglet" CARGO_TARGET_DIR="$fw_target" \
  bash "$fw/models/regenerate.sh" "$work/models" >"$work/regenerate.log" 2>&1 \
  || { cat "$work/regenerate.log"; fail "regenerate.sh failed"; }
for f in "$fw"/models/*.kgl "$fw"/models/*.bin; do
  name="$(basename "$f")"
  if ! cmp -s "$f" "$work/models/$name"; then
    fail "firmware-example/models/$name differs from what regenerate.sh makes now: run
      bash firmware-example/models/regenerate.sh && bash tests/fixtures/vectors/regenerate.sh
    and review the diff of tests/fixtures/vectors/"
  fi
done

expected="$work/expected.txt"
for s in digits_u8 digits_f32 digits_float vibration lr_digits_u8 lr_digits_float tanh_digits_u8 tanh_digits_float int4_digits_u8 digits_int16_input_u8 digits_int16_input_f32; do
  cat "$root/tests/fixtures/vectors/$s.txt"
done >"$expected"

# run <target> <bin> <log>: runs an ELF under QEMU through the runner; prints seconds taken.
run() {
  local t0 rc=0
  t0=$EPOCHREALTIME
  (cd "$fw" && ./qemu-run.sh "$fw_target/$1/release/$2") >"$3" 2>&1 || rc=$?
  awk -v a="$t0" -v b="$EPOCHREALTIME" -v t="$1" -v n="$2" -v rc="$rc" \
    'BEGIN { printf "%s %s: exit %d in %.2f s\n", t, n, rc, b - a }'
  return $rc
}

section() { llvm-size -A "$1" | awk -v s="$2" '$1 == s { print $2 }'; }

for t in "${targets[@]}"; do
  step "$t: build"
  # Not quiet: the build script's budget report comes as cargo warnings.
  fwcargo build --release --target "$t" 2>"$work/build-$t.log" || { cat "$work/build-$t.log"; fail "$t: build"; continue; }
  grep 'model flash' "$work/build-$t.log" | sed 's/^warning: [^:]*: /  /' | sort -u || true

  step "$t: selftest"
  if run "$t" selftest "$work/selftest-$t.txt"; then :; else fail "$t: selftest exited non-zero"; fi
  grep -v '^selftest on' "$work/selftest-$t.txt" | tail -20
  grep -Eq '^selftest: [1-9][0-9]* passed, 0 failed$' "$work/selftest-$t.txt" || fail "$t: selftest summary"

  step "$t: vectors"
  if run "$t" vectors "$work/vectors-$t.txt"; then :; else fail "$t: vectors exited non-zero"; fi
  grep -E '^(stack|vectors|MISMATCH|ERROR)' "$work/vectors-$t.txt" || true
  if grep -E '^(digits_u8|digits_f32|digits_float|vibration|lr_digits_u8|lr_digits_float|tanh_digits_u8|tanh_digits_float|int4_digits_u8|digits_int16_input_u8|digits_int16_input_f32) ' "$work/vectors-$t.txt" | diff -u "$expected" - >"$work/diff-$t.txt"; then
    echo "$(wc -l <"$expected") lines identical to tests/fixtures/vectors/*.txt"
  else
    head -20 "$work/diff-$t.txt"; fail "$t: vector output differs from the expected files"
  fi

  step "$t: classify (demo)"
  if run "$t" classify "$work/classify-$t.txt"; then :; else fail "$t: classify exited non-zero"; fi
  head -3 "$work/classify-$t.txt"; echo "  ..."; tail -1 "$work/classify-$t.txt"
  grep -q '^classify: 64 windows' "$work/classify-$t.txt" || fail "$t: classify did not process 64 windows"
  grep -q "Model::classify gives infer's class on 64 of 64" "$work/classify-$t.txt" \
    || fail "$t: Model::classify disagreed with infer"

  step "$t: a fault fails fast"
  start=$(date +%s)
  if KINGLET_QEMU_TIMEOUT=20 run "$t" fault_check "$work/fault-$t.txt"; then
    fail "$t: fault_check exited 0"
  fi
  cat "$work/fault-$t.txt"
  grep -q '^HARDFAULT' "$work/fault-$t.txt" || fail "$t: no HARDFAULT report"
  (( $(date +%s) - start < 15 )) || fail "$t: fault took too long to end the run"

  step "$t: flash and RAM"
  run "$t" size_runtime "$work/size-$t.txt" || fail "$t: size_runtime"
  for bin in classify vectors selftest; do
    printf '  %-9s flash %7d bytes (.text %d, .rodata %d), RAM .bss %d bytes\n' "$bin" \
      $(( $(section "$fw_target/$t/release/$bin" .vector_table) + $(section "$fw_target/$t/release/$bin" .text) + $(section "$fw_target/$t/release/$bin" .rodata) )) \
      "$(section "$fw_target/$t/release/$bin" .text)" "$(section "$fw_target/$t/release/$bin" .rodata)" \
      "$(section "$fw_target/$t/release/$bin" .bss)"
  done
done

step "build-time model budget"
t=thumbv6m-none-eabi
if KINGLET_RAM_BUDGET=64 fwcargo build -q --release --target "$t" --bin classify >"$work/over-ram.log" 2>&1; then
  fail "build passed with KINGLET_RAM_BUDGET=64"
fi
grep -o 'scratch buffer RAM [0-9]* bytes exceeds the microbit RAM budget of 64 bytes' "$work/over-ram.log" \
  || { cat "$work/over-ram.log"; fail "no clear RAM budget message"; }
if KINGLET_FLASH_BUDGET=8K fwcargo build -q --release --target "$t" --bin classify >"$work/over-flash.log" 2>&1; then
  fail "build passed with KINGLET_FLASH_BUDGET=8K"
fi
grep -o 'model flash [0-9]* bytes exceeds the microbit flash budget of 8192 bytes' "$work/over-flash.log" \
  || { cat "$work/over-flash.log"; fail "no clear flash budget message"; }
fwcargo build -q --release --target "$t" --bin classify 2>/dev/null && echo "default budget: builds" \
  || fail "build under the default budget failed"

step "your own model, step by step (README), on QEMU"
KINGLET="$root_target/release/kinglet" FW_TARGET_DIR="$fw_target" \
  bash "$root/scripts/firmware-own-model.sh" "${targets[@]}" || fail "own model steps"

# <board> <target> <feature> <flash origin>: the board's boards.toml entry and memory map.
boards=(
  "pico thumbv6m-none-eabi board-pico 0x10000100"
  "microbit-v2 thumbv7em-none-eabihf board-microbit-v2 0x00000000"
)
for b in "${boards[@]}"; do
  read -r name t feature origin <<<"$b"
  step "board $name: build ($t, --features $feature; not flashed: no probe in CI)"
  if ! fwcargo build --release --target "$t" --features "$feature" --bin classify --bin vectors \
    --bin selftest 2>"$work/build-$name.log"; then
    cat "$work/build-$name.log"; fail "board $name: build"; continue
  fi
  grep 'all models' "$work/build-$name.log" | sed 's/^warning: [^:]*: /  /' | sort -u || true
  for bin in classify vectors selftest; do
    elf="$fw_target/$t/release/$bin"
    vt=$(llvm-objdump -h "$elf" | awk '$2 == ".vector_table" { print "0x" $4 }')
    (( vt == origin )) || fail "board $name: $bin: vector table at $vt, not $origin"
    grep -q _SEGGER_RTT < <(llvm-nm "$elf") || fail "board $name: $bin: no RTT control block (defmt-rtt)"
    printf '  %-9s flash %7d bytes, RAM .bss %d bytes\n' "$bin" \
      $(( $(section "$elf" .vector_table) + $(section "$elf" .text) + $(section "$elf" .rodata) )) \
      "$(section "$elf" .bss)"
  done
  if [[ $name == pico ]]; then
    # The RP2040 boot ROM runs the 256 bytes at the start of flash (boot stage 2).
    nm_boot2=$(llvm-nm "$fw_target/$t/release/vectors" | awk '$3 == "BOOT2_FIRMWARE" { print $1 }')
    [[ $nm_boot2 == 10000000 ]] || fail "board pico: boot stage 2 at ${nm_boot2:-nowhere}, not 0x10000000"
  fi
done

step "defmt feature builds"
fwcargo build -q --release --target thumbv7em-none-eabihf --features defmt --bin classify 2>/dev/null \
  && echo "classify with defmt: built" || fail "defmt build"

step "lint"
# Only this workspace's own packages: `--all` would also reach the path dependencies.
fwcargo fmt --check -p kinglet-firmware-example -p kinglet-vibration-features -p kinglet-fw-sensor \
  -p kinglet-fw-vectors -p kinglet-fw-make-assets || fail "cargo fmt in firmware-example"
fwcargo clippy -q --target "$host" -p kinglet-vibration-features -p kinglet-fw-sensor -p kinglet-fw-vectors -p kinglet-fw-make-assets --all-targets -- -D warnings || fail "clippy (host crates)"
# The firmware's own code is the same on both targets; lint it once, on the M0.
if ! fwcargo clippy -q --release --target thumbv6m-none-eabi -p kinglet-firmware-example --bins -- -D warnings 2>"$work/clippy.log"; then
  grep -v 'model flash' "$work/clippy.log"; fail "clippy (firmware)"
fi
# Each board's own code (its HAL, pins and sensor) on its target.
for b in "${boards[@]}"; do
  read -r name t feature _ <<<"$b"
  if ! fwcargo clippy -q --release --target "$t" --features "$feature" -p kinglet-firmware-example --bins -- -D warnings 2>"$work/clippy-$name.log"; then
    grep -v 'model flash' "$work/clippy-$name.log"; fail "clippy (board $name)"
  fi
done

echo
if (( failures )); then
  echo "firmware: $failures check(s) failed"
  exit 1
fi
echo "firmware: all checks passed in $SECONDS s"
