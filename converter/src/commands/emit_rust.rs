//! `kinglet emit-rust`: write a packed blob as a Rust source file.
use anyhow::{anyhow, Context, Result};
use kinglet_converter::output_guard::{check_distinct, Named};
use kinglet_converter::{atomic::write_atomic, emit_rust::render};
use kinglet_runtime::Model;
use std::path::PathBuf;

use super::Outcome;

/// Arguments of `kinglet emit-rust`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The packed model (`.kgl`).
    blob: PathBuf,
    /// The Rust file to write (replaced atomically).
    #[arg(short, long)]
    out: PathBuf,
}

pub fn run(a: Args) -> Result<Outcome> {
    check_distinct(
        &[Named::new("the output (-o)", &a.out)],
        &[Named::new("the blob", &a.blob)],
    )?;
    let bytes =
        std::fs::read(&a.blob).with_context(|| format!("cannot read {}", a.blob.display()))?;
    let model = Model::parse(&bytes).map_err(|e| anyhow!("{}: {e}", a.blob.display()))?;
    let name = a.blob.file_name().map_or_else(
        || a.blob.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    write_atomic(&a.out, render(&bytes, &model, &name).as_bytes())?;
    super::out::line(&format!(
        "wrote {} ({} bytes of model, scratch buffer {} bytes)",
        a.out.display(),
        bytes.len(),
        model.scratch_bytes()
    ))?;
    Ok(Outcome::Pass)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writes_the_file_and_rejects_a_bad_blob_without_output() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("model.rs");
        let blob = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
            .join("../firmware-example/models/vibration.kgl");
        run(Args {
            blob,
            out: out.clone(),
        })
        .unwrap();
        let text = std::fs::read_to_string(&out).unwrap();
        assert!(text.contains("pub const INPUT_LEN: usize = 15;"));
        let bad = dir.path().join("bad.kgl");
        std::fs::write(&bad, [0u8; 30]).unwrap();
        let out2 = dir.path().join("other.rs");
        let e = run(Args {
            blob: bad,
            out: out2.clone(),
        })
        .err()
        .unwrap();
        assert!(format!("{e:#}").contains("bad.kgl"), "{e:#}");
        assert!(!out2.exists());
        // Only the written file and the bad blob: no temporary left behind.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
    }
}
