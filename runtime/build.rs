//! Picks the dense kernels for the compilation target (see `src/dense/mod.rs`).
//!
//! ARM target features such as `dsp` are not visible to `cfg(target_feature)` on stable Rust,
//! so the choice follows the target triple: `thumbv7em` (Cortex-M4/M7, DSP extension) gets the
//! `dsp` kernels, with the f32 one when the triple is hard-float (`eabihf`); the Thumb-1-class
//! cores get the `m0` kernels. `KINGLET_KERNEL=portable` forces the portable kernels.
fn main() {
    println!("cargo::rustc-check-cfg=cfg(kinglet_kernel, values(\"dsp\", \"m0\"))");
    println!("cargo::rustc-check-cfg=cfg(kinglet_fpu)");
    println!("cargo::rerun-if-env-changed=KINGLET_KERNEL");
    println!("cargo::rerun-if-changed=build.rs");
    let target = std::env::var("TARGET").unwrap_or_default();
    if std::env::var("KINGLET_KERNEL").is_ok_and(|k| k == "portable") {
        return;
    }
    if target.starts_with("thumbv7em-") {
        println!("cargo::rustc-cfg=kinglet_kernel=\"dsp\"");
        if target.ends_with("eabihf") {
            println!("cargo::rustc-cfg=kinglet_fpu");
        }
    } else if ["thumbv6m-", "thumbv7m-", "thumbv8m.base-"]
        .iter()
        .any(|p| target.starts_with(p))
    {
        println!("cargo::rustc-cfg=kinglet_kernel=\"m0\"");
    }
}
