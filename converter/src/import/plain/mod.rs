//! The plain model description: a JSON file of Kinglet's own design for dense classifiers trained
//! in frameworks with no ONNX export. The full format, with an example and the Python lines that
//! dump Keras and PyTorch layers, is in `docs/plain-model-format.md`. In short:
//!
//! ```json
//! {
//!   "kinglet_model": 1,
//!   "input_width": 4,
//!   "scaler": {"mean": [5.8, 3.0, 3.8, 1.2], "std": [0.8, 0.4, 1.8, 0.8]},
//!   "layers": [
//!     {"inputs": 4, "outputs": 8, "activation": "relu",
//!      "weights": {"layout": "in_out", "npy": "dense_kernel.npy"}, "bias": {"npy": "dense_bias.npy"}},
//!     {"inputs": 8, "outputs": 3, "activation": "linear",
//!      "weights": [[0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8], [0, 0, 0, 0, 0, 0, 0, 0], [1, 1, 1, 1, 1, 1, 1, 1]],
//!      "bias": [0.0, 0.1, -0.1]}
//!   ],
//!   "output": "softmax",
//!   "labels": ["setosa", "versicolor", "virginica"]
//! }
//! ```
//!
//! Weights are a list of rows `[outputs][inputs]` (PyTorch's `Linear.weight`), or an object with
//! a `"layout"` (`"out_in"` or `"in_out"`, the latter a Keras `Dense` kernel) and either
//! `"values"` (flat or rows) or `"npy"` (a path relative to the description's directory).

mod build;
mod error;
mod schema;

use std::path::Path;

pub use error::PlainImportError;

/// Reads a plain model description file; `.npy` paths in it are relative to its directory.
pub fn import_plain_file(path: &Path) -> Result<crate::graph::FloatModel, PlainImportError> {
    let text = std::fs::read_to_string(path).map_err(|source| PlainImportError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let base_dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    import_plain_str(&text, base_dir).map_err(|e| PlainImportError::InFile {
        path: path.to_path_buf(),
        source: Box::new(e),
    })
}

/// The `.npy` files a plain model description at `path` names, resolved against its directory
/// (empty when the file cannot be read or is not JSON: the import reports that). The CLI uses
/// it so that an output path never names one of the model's own weight files.
pub fn referenced_files(path: &Path) -> Vec<std::path::PathBuf> {
    fn walk(v: &serde_json::Value, base: &Path, out: &mut Vec<std::path::PathBuf>) {
        match v {
            serde_json::Value::Object(o) => {
                for (k, v) in o {
                    match (k.as_str(), v) {
                        ("npy", serde_json::Value::String(s)) => out.push(base.join(s)),
                        _ => walk(v, base, out),
                    }
                }
            }
            serde_json::Value::Array(a) => a.iter().for_each(|v| walk(v, base, out)),
            _ => {}
        }
    }
    let base_dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let mut out = Vec::new();
    if let Some(v) = std::fs::read_to_string(path)
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
    {
        walk(&v, base_dir, &mut out);
    }
    out
}

fn json_error(e: serde_path_to_error::Error<serde_json::Error>) -> PlainImportError {
    let location = e.path().to_string();
    let source = e.into_inner();
    if source.is_syntax() || source.is_eof() {
        PlainImportError::Syntax(source)
    } else {
        PlainImportError::Json { location, source }
    }
}

/// Reads a plain model description from text; `.npy` paths in it are relative to `base_dir`.
pub fn import_plain_str(
    json: &str,
    base_dir: &Path,
) -> Result<crate::graph::FloatModel, PlainImportError> {
    // The version tag is read first, so that a newer version is reported as such rather than
    // as a list of unknown fields.
    let value: serde_json::Value = serde_json::from_str(json).map_err(PlainImportError::Syntax)?;
    match value.as_object().map(|o| o.get("kinglet_model")) {
        None | Some(None) => return Err(PlainImportError::NotAModel),
        Some(Some(v)) if v.as_u64() == Some(1) => {}
        Some(Some(v)) => return Err(PlainImportError::UnsupportedVersion(v.to_string())),
    }
    let doc: schema::ModelDoc =
        serde_path_to_error::deserialize(&mut serde_json::Deserializer::from_str(json))
            .map_err(json_error)?;
    build::build_model(doc, base_dir)
}

#[cfg(test)]
mod tests;
