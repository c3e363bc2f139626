//! Puts the memory map of the target's QEMU machine where cortex-m-rt's `link.x` looks for it,
//! and points the firmware at the generated blobs (`KB_BLOBS`, set by scripts/kernel-bench.sh).
use std::path::PathBuf;

fn main() {
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
    println!("cargo::rustc-check-cfg=cfg(kb_big_f32)");
    if !target.starts_with("thumbv6m") {
        // The f32 784x100 blobs (2 x 314 KB) do not fit the micro:bit's 256 KiB of flash.
        println!("cargo:rustc-cfg=kb_big_f32");
    }
    println!("cargo:rerun-if-env-changed=KB_BLOBS");
    let blobs = std::env::var("KB_BLOBS")
        .unwrap_or_else(|_| dir.join("../target/blobs").display().to_string());
    println!("cargo:rustc-env=KB_BLOBS={blobs}");
    for f in std::fs::read_dir(&blobs).into_iter().flatten().flatten() {
        println!("cargo:rerun-if-changed={}", f.path().display());
    }
}
