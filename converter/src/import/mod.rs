//! Importers: each turns a trained model file into a [`crate::graph::FloatModel`].

pub mod onnx;
pub mod plain;

use anyhow::{bail, Result};
use std::path::Path;

use crate::graph::FloatModel;

/// Imports a model file, choosing the importer by extension: `.onnx` for ONNX, `.json` for the
/// plain description (`docs/plain-model-format.md`).
pub fn import_file(path: &Path) -> Result<FloatModel> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    match ext.as_deref() {
        Some("onnx") => Ok(onnx::import_onnx_file(path)?),
        Some("json") => Ok(plain::import_plain_file(path)?),
        _ => bail!(
            "{}: unknown model type (expected a .onnx file or a .json plain model description)",
            path.display()
        ),
    }
}
