//! The pieces of the import, one concept per file, plus helpers shared by the graph walk:
//! reading a node's constant operands and checking that its extra outputs are unused.

pub mod activation;
pub mod affine;
pub mod batchnorm;
pub mod binary_output;
pub mod dense;
pub mod gelu_pattern;
pub mod labels;
pub mod linear_classifier;
pub mod normalizer;
pub mod passthrough;
pub mod pointwise;
pub mod score_column;
pub mod shape;
pub mod shape_value;

use super::error::OnnxImportError;
use super::graph_index::GraphIndex;
use super::node::Node;
use super::tensor::Tensor;

/// Decodes input `i` of `n`, which must be a constant (initializer or `Constant` node).
pub fn constant_input(
    g: &GraphIndex<'_>,
    n: &Node<'_>,
    i: usize,
    role: &str,
) -> Result<Tensor, OnnxImportError> {
    let Some(name) = n.input(i) else {
        return Err(n.err(format!(
            "input #{i} ({role}) is missing; supported: a constant {role}"
        )));
    };
    match g.constant(name) {
        Some(Ok(t)) => Ok(t),
        Some(Err(e)) => Err(n.err(format!("{role} input '{name}': {e}"))),
        None => Err(n.err(format!(
            "{role} input '{name}' is not a constant (initializer or Constant node); supported: a constant {role}"
        ))),
    }
}

/// Decodes an optional constant input (absent or "" gives `None`).
pub fn optional_constant(
    g: &GraphIndex<'_>,
    n: &Node<'_>,
    i: usize,
    role: &str,
) -> Result<Option<Tensor>, OnnxImportError> {
    match n.input(i) {
        None => Ok(None),
        Some(_) => constant_input(g, n, i, role).map(Some),
    }
}

/// Float values of a constant, all finite, with the node named on error.
pub fn finite<'t>(n: &Node<'_>, t: &'t Tensor, role: &str) -> Result<&'t [f32], OnnxImportError> {
    t.finite_floats().map_err(|e| n.err(format!("{role}: {e}")))
}

/// The first output of `n`; every further output must be omitted or unused.
pub fn single_output<'g>(g: &GraphIndex<'g>, n: &Node<'g>) -> Result<&'g str, OnnxImportError> {
    let outs = n.outputs();
    let Some(first) = outs.first().map(String::as_str).filter(|s| !s.is_empty()) else {
        return Err(n.err("the node has no output"));
    };
    for (k, extra) in outs.iter().enumerate().skip(1) {
        if !extra.is_empty() && g.is_used(extra) {
            return Err(n.err(format!(
                "output #{k} '{extra}' is used by the graph; supported: only the first output is used (e.g. no Dropout mask, no BatchNormalization running statistics)"
            )));
        }
    }
    Ok(first)
}
