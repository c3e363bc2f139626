#!/usr/bin/env bash
# Proves the runtime needs neither std nor alloc: it builds for bare-metal targets, names no
# `alloc` crate, and none of its (normal) dependencies has an `alloc` or `std` feature enabled.
set -euo pipefail
cd "$(dirname "$0")/.."
for t in thumbv6m-none-eabi thumbv7em-none-eabihf; do
  cargo build -q -p kinglet-runtime --target "$t"
  cargo build -q -p kinglet-runtime --target "$t" --features defmt
done
if grep -rnE 'extern crate (alloc|std)' runtime/src; then
  echo "runtime names alloc/std" >&2; exit 1
fi
bad=$(cargo tree -p kinglet-runtime --target thumbv6m-none-eabi -e normal,features --prefix none \
  | grep -E 'feature "(alloc|std)"' || true)
if [ -n "$bad" ]; then
  echo "runtime dependencies enable alloc/std:" >&2; echo "$bad" >&2; exit 1
fi
echo "runtime: no std, no alloc (thumbv6m, thumbv7em; with and without defmt)"
