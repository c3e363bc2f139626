//! ONNX import: reads an ONNX `ModelProto` of a dense classifier and normalises it into a
//! [`FloatModel`].
//!
//! What is understood (dispatch on domain and op type; domain "" and "ai.onnx" are the same):
//! - dense layers: `MatMul` + `Add` (weights `[in, out]`, bias `[out]` or `[1, out]`, on either
//!   side of the `Add`), `Gemm` (`transA = 0`, `transB` 0 or 1, `alpha`/`beta`, optional `C`);
//! - `Relu` after a dense layer; `BatchNormalization` after a dense layer, folded into it;
//! - output functions: `Softmax` (axis 1 or -1), `Sigmoid` on a single output, including the
//!   two-class `Sub(1, p)` + `Concat([1 - p, p])` form, and a single raw score's
//!   `Mul(s, -1)` + `Concat([-s, s])` form;
//! - `ai.onnx.ml` `LinearClassifier` (a dense layer and its output function, class labels kept),
//!   `Normalizer` (L1) after it, and `ArrayFeatureExtractor(scores, [1])` after a binary one with
//!   raw scores (`ops/linear_classifier.rs`);
//! - the input scaler: `ai.onnx.ml` `Scaler`, or constant `Sub`/`Add`/`Mul`/`Div` nodes before
//!   the first dense layer, composed into one `(x - offset) * scale` map;
//! - `Flatten`/`Reshape` to `[N, features]` at the input, the `Reshape` target constant or
//!   computed from the data's shape (`Shape`, `Gather`, `Slice`, `Squeeze`, `Unsqueeze`,
//!   `Concat`, `Cast`: `ops/shape_value.rs`); `Identity`, `Dropout` and `Cast` to float are
//!   removed;
//! - the class-label branch (`ArgMax` -> `ArrayFeatureExtractor` -> `Reshape` -> `Cast`) is
//!   dropped and its class labels kept;
//! - constants from initializers and `Constant` nodes, in `raw_data` or the typed fields, and
//!   nodes that compute constants from them (`Identity`, `Transpose`, `Cast`, `Reshape`,
//!   `Flatten`, `Squeeze`, `Unsqueeze`), folded at import (`fold.rs`), as PyTorch's exporter
//!   writes with constant folding off or de-duplicated initializers.
//!
//! Anything else is an [`OnnxImportError`] naming the node, what was found and what is
//! supported.

mod attr;
mod error;
mod fold;
mod graph_index;
mod node;
mod normalise;
mod ops;
mod proto;
mod tensor;

use std::path::Path;

use prost::Message;

use crate::graph::FloatModel;

pub use error::{NodeRef, OnnxImportError, SUPPORTED_OPS};

/// Imports an ONNX model from the bytes of a `.onnx` file.
pub fn import_onnx(bytes: &[u8]) -> Result<FloatModel, OnnxImportError> {
    let model = proto::ModelProto::decode(bytes)?;
    let graph = model.graph.as_ref().ok_or(OnnxImportError::NoGraph)?;
    let index = graph_index::GraphIndex::build(graph)?;
    normalise::normalise(&index)
}

/// Imports an ONNX model from a `.onnx` file.
pub fn import_onnx_file(path: &Path) -> Result<FloatModel, OnnxImportError> {
    let bytes = std::fs::read(path).map_err(|source| OnnxImportError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    import_onnx(&bytes)
}

#[cfg(test)]
mod test_graph;
