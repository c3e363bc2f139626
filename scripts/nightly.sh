# Sourced by scripts/fuzz-smoke.sh and scripts/miri.sh: the nightly toolchain both use, pinned
# by date (the stable one is pinned in rust-toolchain.toml).
#
# rustup names a dated nightly `nightly-YYYY-MM-DD`. CI is promised only the package
# registries, so downloading one there may fail, and rustup refuses `toolchain link` under such
# a name. The machine image ships one undated `nightly` instead, whose channel
# manifest (`lib/rustlib/multirust-channel-manifest.toml`) says which day's it is. So
# `kinglet_nightly` prints the toolchain to use: `nightly-DATE` when rustup has it (or can
# install it, where its server is reachable), else `nightly` when that is DATE's; otherwise it
# fails, rather than run on whatever nightly happens to be there.
KINGLET_NIGHTLY_DATE=2026-05-20

kinglet_nightly() {
    local dated="nightly-$KINGLET_NIGHTLY_DATE" sysroot
    if rustup toolchain list | grep -q "^$dated-"; then
        echo "$dated"
    elif sysroot=$(rustc +nightly --print sysroot 2>/dev/null) &&
        grep -qx "date = \"$KINGLET_NIGHTLY_DATE\"" "$sysroot/lib/rustlib/multirust-channel-manifest.toml" 2>/dev/null; then
        echo nightly
    elif rustup toolchain install "$dated" --profile minimal >/dev/null 2>&1; then
        echo "$dated"
    else
        return 1
    fi
}
