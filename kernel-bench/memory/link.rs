// Shared by the build scripts of `fw` and `size` (`include!`d): puts the memory map of the
// target's QEMU machine where cortex-m-rt's `link.x` looks for it.

/// Copies `memory/<machine>.x` to `OUT_DIR/memory.x` and adds the link arguments.
fn link_memory_map() {
    use std::path::PathBuf;
    let dir = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").unwrap_or_default());
    let out = PathBuf::from(std::env::var("OUT_DIR").unwrap_or_default());
    let target = std::env::var("TARGET").unwrap_or_default();
    let memory = if target.starts_with("thumbv6m") {
        "microbit.x"
    } else {
        "mps2-an386.x"
    };
    let src = dir.join("../memory").join(memory);
    std::fs::copy(&src, out.join("memory.x"))
        .unwrap_or_else(|e| panic!("copying {}: {e}", src.display()));
    println!("cargo:rerun-if-changed={}", src.display());
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
}
