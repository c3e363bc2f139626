#!/usr/bin/env bash
# Cargo runner: runs a firmware ELF under QEMU with semihosting (console output and exit code).
#
# The machine follows the ELF's target: Cortex-M0 builds (thumbv6m) run on `microbit`, Cortex-M4F
# builds (thumbv7em) on `mps2-an386`. The target is read from cargo's output path, or else from
# the ELF's ARM attributes. The run is wrapped in `timeout` (KINGLET_QEMU_TIMEOUT seconds,
# default 120), so a hung guest fails instead of blocking; exit code 124 means it timed out.
set -euo pipefail
elf="${1:?usage: qemu-run.sh <firmware.elf> [args...]}"
shift
case "$elf" in
  */thumbv6m-none-eabi/*) arch=v6m ;;
  */thumbv7em-none-eabihf/*) arch=v7em ;;
  *)
    attrs="$(readelf -A "$elf" 2>/dev/null || true)"
    if grep -q 'Tag_CPU_arch: v6S-M' <<<"$attrs"; then arch=v6m
    elif grep -q 'Tag_CPU_arch: v7E-M' <<<"$attrs"; then arch=v7em
    else echo "qemu-run.sh: cannot tell the target of $elf" >&2; exit 2
    fi ;;
esac
case "$arch" in
  v6m) machine=microbit; cpu=cortex-m0 ;;
  v7em) machine=mps2-an386; cpu=cortex-m4 ;;
esac
exec timeout "${KINGLET_QEMU_TIMEOUT:-120}" qemu-system-arm \
  -machine "$machine" -cpu "$cpu" \
  -nographic -monitor none -serial none \
  -semihosting-config enable=on,target=native \
  -kernel "$elf" "$@"
