//! `kinglet emit-rust`'s file compiles cleanly where firmware compiles it: in a `no_std`
//! library crate under `#![deny(warnings)]` (and `RUSTFLAGS=-D warnings`), for
//! `thumbv6m-none-eabi`, against the runtime itself, both as `mod model;` and through
//! `include!` — using only some of its items, as a firmware does.
//!
//! The crate is written into cargo's per-test scratch directory and built with a target
//! directory of its own that stays there between runs, so only the first run builds the
//! runtime's dependencies for the target.
use kinglet_converter::emit_rust::render;
use kinglet_runtime::Model;
use std::path::Path;
use std::process::Command;

fn repo() -> &'static Path {
    Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/.."))
}

const LIB: &str = r#"#![no_std]
#![deny(warnings)]

// Used: only the blob and the scratch size. The other items must not warn.
mod model;

mod included {
    include!("included.rs");
}

/// The scratch buffer a firmware would reserve.
pub const SCRATCH: usize = model::SCRATCH_BYTES;

/// Parses the blob the firmware way and says whether its weights came out aligned.
pub fn aligned() -> bool {
    match kinglet_runtime::Model::parse(model::MODEL) {
        Ok(m) => m.weights_aligned(),
        Err(_) => false,
    }
}

/// The included copy's width.
pub fn width() -> usize {
    included::INPUT_LEN
}
"#;

#[test]
fn emitted_file_builds_for_thumbv6m_under_deny_warnings() {
    let scratch = Path::new(env!("CARGO_TARGET_TMPDIR")).join("emit-rust-no-std");
    let krate = scratch.join("crate");
    std::fs::create_dir_all(krate.join("src")).unwrap();
    let runtime = repo().join("runtime").canonicalize().unwrap();
    let manifest = format!(
        "[package]\nname = \"emitted-model-check\"\nversion = \"0.0.0\"\nedition = \"2021\"\n\
         publish = false\n\n[dependencies]\nkinglet-runtime = {{ path = {:?} }}\n\n\
         # Its own workspace: not a member of the repository's.\n[workspace]\n\n\
         [profile.dev]\npanic = \"abort\"\n",
        runtime.display().to_string()
    );
    std::fs::write(krate.join("Cargo.toml"), manifest).unwrap();
    // The repository's lock file: the same dependency versions, none fetched anew.
    std::fs::copy(repo().join("Cargo.lock"), krate.join("Cargo.lock")).unwrap();
    std::fs::write(krate.join("src/lib.rs"), LIB).unwrap();
    for (file, blob) in [("model.rs", "vibration.kgl"), ("included.rs", "digits.kgl")] {
        let bytes = std::fs::read(repo().join("firmware-example/models").join(blob)).unwrap();
        let model = Model::parse(&bytes).unwrap();
        let text = render(&bytes, &model, blob);
        std::fs::write(krate.join("src").join(file), text).unwrap();
    }
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    let out = Command::new(cargo)
        .current_dir(&krate)
        .args(["build", "--quiet", "--target", "thumbv6m-none-eabi"])
        .env("CARGO_TARGET_DIR", scratch.join("target"))
        .env("RUSTFLAGS", "-D warnings")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("CARGO_BUILD_TARGET")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "the emitted file does not build for thumbv6m-none-eabi under -D warnings:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // What cargo built is the crate above: its library is there.
    let rlib = scratch.join("target/thumbv6m-none-eabi/debug/libemitted_model_check.rlib");
    assert!(rlib.exists(), "{} missing", rlib.display());
}

#[test]
fn the_same_crate_with_a_warning_fails_so_the_check_can_fail() {
    // The check above is only worth something if a warning does fail the build: an unused
    // private constant in the same setting must.
    let scratch = Path::new(env!("CARGO_TARGET_TMPDIR")).join("emit-rust-no-std");
    let krate = scratch.join("warning-crate");
    std::fs::create_dir_all(krate.join("src")).unwrap();
    std::fs::write(
        krate.join("Cargo.toml"),
        "[package]\nname = \"emitted-warning-check\"\nversion = \"0.0.0\"\nedition = \"2021\"\n\
         publish = false\n\n[workspace]\n",
    )
    .unwrap();
    std::fs::write(
        krate.join("src/lib.rs"),
        "#![no_std]\n#![deny(warnings)]\nmod model { pub const UNUSED: usize = 1; }\n",
    )
    .unwrap();
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    let out = Command::new(cargo)
        .current_dir(&krate)
        .args(["build", "--quiet", "--target", "thumbv6m-none-eabi"])
        .env("CARGO_TARGET_DIR", scratch.join("target"))
        .env("RUSTFLAGS", "-D warnings")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .output()
        .unwrap();
    assert!(
        !out.status.success(),
        "a dead constant did not fail the build"
    );
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("never used"),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}
