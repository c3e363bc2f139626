#!/usr/bin/env bash
# The published kinglet-runtime package holds exactly its sources, the build script, the format
# specification its doc comments cite (FORMAT.md), its README and both licences — no tests, no
# fixtures — and its manifest drops the path-only dev-dependency on kinglet-builder.
set -euo pipefail
cd "$(dirname "$0")/.."
target="${CARGO_TARGET_DIR:-$PWD/target}"
fail() { echo "check-package: $*" >&2; exit 1; }

listed=$(cargo package -q -p kinglet-runtime --allow-dirty --list | grep -vx '.cargo_vcs_info.json' | sort)
expected=$( (printf '%s\n' Cargo.lock Cargo.toml Cargo.toml.orig FORMAT.md LICENSE-APACHE LICENSE-MIT README.md build.rs
             cd runtime && git ls-files -co --exclude-standard -- 'src/*.rs') | sort)
if [ "$listed" != "$expected" ]; then
    diff <(echo "$expected") <(echo "$listed") >&2 || true
    fail "the package list differs from the expected one (< expected, > listed)"
fi

cargo package -q -p kinglet-runtime --allow-dirty --no-verify
version=$(sed -n 's/^version = "\(.*\)"/\1/p' Cargo.toml | head -1)
crate="$target/package/kinglet-runtime-$version.crate"
[ -s "$crate" ] || fail "no $crate"
manifest=$(tar -xzf "$crate" -O "kinglet-runtime-$version/Cargo.toml")
if grep -q 'kinglet-builder' <<<"$manifest"; then
    fail "the packaged manifest still names kinglet-builder"
fi
grep -q '^readme = "README.md"' <<<"$manifest" || fail "the packaged manifest has no readme"
contents=$(tar -tzf "$crate")
grep -qx "kinglet-runtime-$version/FORMAT.md" <<<"$contents" || fail "FORMAT.md is not in the package"
echo "check-package: $(wc -l <<<"$listed") files, as expected"
