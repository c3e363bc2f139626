//! Puts the memory map of the target's QEMU machine where cortex-m-rt's `link.x` looks for it
//! (`../memory/link.rs`), and points the firmware at the generated blobs (`KB_BLOBS`, set by
//! scripts/kernel-bench.sh).
include!("../memory/link.rs");

fn main() {
    link_memory_map();
    let dir = std::path::PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").unwrap_or_default());
    let target = std::env::var("TARGET").unwrap_or_default();
    println!("cargo::rustc-check-cfg=cfg(kb_big_f32)");
    println!("cargo::rustc-check-cfg=cfg(kb_unaligned)");
    println!("cargo::rustc-check-cfg=cfg(kb_big_models)");
    if !target.starts_with("thumbv6m") {
        // The f32 784x100 blobs (2 x 314 KB) do not fit the micro:bit's 256 KiB of flash.
        println!("cargo:rustc-cfg=kb_big_f32");
        // Unaligned copies of the blobs: only the Cortex-M4 kernels care about alignment (the
        // M0 ones load bytes), and the M0's flash has no room for them.
        println!("cargo:rustc-cfg=kb_unaligned");
        // The 784-input synthetic layer as a whole model: its buffers (features, counts,
        // arena, 100 scores: about 6 KiB of stack) do not fit beside the M0 run's 16 KiB.
        println!("cargo:rustc-cfg=kb_big_models");
    }
    println!("cargo:rerun-if-env-changed=KB_BLOBS");
    let blobs = std::env::var("KB_BLOBS")
        .unwrap_or_else(|_| dir.join("../target/blobs").display().to_string());
    println!("cargo:rustc-env=KB_BLOBS={blobs}");
    for f in std::fs::read_dir(&blobs).into_iter().flatten().flatten() {
        println!("cargo:rerun-if-changed={}", f.path().display());
    }
}
