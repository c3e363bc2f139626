#!/usr/bin/env bash
# Follows the README's "Install" section from outside the repository:
# 1. its `cargo install --path` line puts a working `kinglet` on PATH (into a scratch root),
#    of ordinary size (no debug info: the release profile);
# 2. a scratch crate outside the repository that depends on the runtime by each of the README's
#    path lines (the checkout's location put in for `../kinglet`) builds for thumbv6m-none-eabi.
# Exits non-zero when a step fails. CI runs it (.ci/run).
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
# The scratch crate is not under the repository's rust-toolchain.toml: use the same toolchain.
RUSTUP_TOOLCHAIN="$(sed -n 's/^channel = "\(.*\)"$/\1/p' "$root/rust-toolchain.toml")"
export RUSTUP_TOOLCHAIN

readme_block() { # the lines of the README's Install code block that match $1
  sed -n '/^## Install/,/^## /p' "$root/README.md" | grep -E "$1"
}

echo "install: 1. the CLI"
line=$(readme_block '^cargo install .*--path converter' | sed 's/ *#.*$//')
[[ -n $line ]] || { echo "README has no 'cargo install ... --path converter' line"; exit 1; }
echo "  $line"
# The install reuses the checkout's release build (cargo install --path builds in the
# workspace's target directory), so after the README's main command it only links.
(cd "$root" && CARGO_INSTALL_ROOT="$work/root" $line -q)
PATH="$work/root/bin:$PATH" kinglet --version
size=$(stat -c %s "$work/root/bin/kinglet")
echo "  installed kinglet: $size bytes"
(( size < 16 * 1024 * 1024 )) || { echo "kinglet is $size bytes: debug info in the release profile?"; exit 1; }
PATH="$work/root/bin:$PATH" kinglet inspect "$root/firmware-example/models/digits.kgl" >/dev/null

echo "install: 2. the runtime as a dependency, built for thumbv6m-none-eabi"
mapfile -t deps < <(readme_block '^kinglet-runtime = \{ path = ' | sed 's/ *#.*$//')
(( ${#deps[@]} == 2 )) || { echo "README's Install section should have 2 path lines, has ${#deps[@]}"; exit 1; }
for i in "${!deps[@]}"; do
  dep="${deps[$i]//..\/kinglet\/runtime/$root/runtime}"
  crate="$work/app$i"
  mkdir -p "$crate/src"
  cat >"$crate/Cargo.toml" <<TOML
[package]
name = "scratch-app$i"
version = "0.1.0"
edition = "2021"

[dependencies]
$dep
TOML
  # A firmware's use of the stable API: parse a blob in flash, size the scratch buffer from it.
  cat >"$crate/src/lib.rs" <<'RS'
#![no_std]
use kinglet_runtime::{embed_blob, scratch_bytes, Input, Model};

const BLOB: &[u8] = embed_blob!(env!("APP_BLOB"));
const SCRATCH: usize = scratch_bytes(BLOB);

pub fn class_of(features: &[u8]) -> Option<usize> {
    let mut scratch = [0u8; SCRATCH];
    let model = Model::parse(BLOB).ok()?;
    model.classify(Input::U8(features), &mut scratch).ok()
}
RS
  echo "  $dep"
  (cd "$crate" && APP_BLOB="$root/firmware-example/models/digits.kgl" \
    CARGO_TARGET_DIR="$work/target" cargo build -q --release --target thumbv6m-none-eabi)
  echo "  built"
done
echo "install: all steps passed"
