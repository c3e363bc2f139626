//! The class-label branch exporters append to classifiers: `ArgMax` over the scores, then
//! `ArrayFeatureExtractor` (`ai.onnx.ml`) picking from a constant class-label tensor, then
//! shape and type plumbing (`Reshape`, `Cast`, ...) into a graph output. The runtime does the
//! argmax itself, so the branch is dropped; only the labels are kept.

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::graph_index::GraphIndex;
use super::super::node::{Domain, Node};
use super::{constant_input, single_output};

/// What the label branch contributed.
#[derive(Debug, Clone)]
pub struct LabelBranch<'g> {
    /// The `ArgMax` node that starts it.
    pub argmax: Node<'g>,
    /// Class labels (empty when there is no `ArrayFeatureExtractor`).
    pub labels: Vec<String>,
    /// Graph outputs computed by the branch.
    pub outputs: Vec<&'g str>,
}

/// True for a node that starts a label branch.
pub fn is_argmax(n: &Node<'_>) -> bool {
    n.domain() == Domain::Onnx && n.op() == "ArgMax"
}

/// Follows the branch from `argmax`, marking its nodes in `visited`. The walk moves to a new
/// node at each step, so it ends within the graph's node count.
pub fn follow<'g>(
    g: &GraphIndex<'g>,
    argmax: Node<'g>,
    visited: &mut [bool],
) -> Result<LabelBranch<'g>, OnnxImportError> {
    let axis = attr::int_or(argmax.proto, "axis", 0).map_err(|e| argmax.err(e))?;
    if axis != 1 && axis != -1 {
        return Err(argmax.err(format!(
            "ArgMax over axis {axis}; supported: axis 1 or -1 (over the classes)"
        )));
    }
    let mut branch = LabelBranch {
        argmax,
        labels: Vec::new(),
        outputs: Vec::new(),
    };
    let mut node = argmax;
    for _ in 0..=g.nodes.len() {
        if let Some(v) = visited.get_mut(node.index) {
            *v = true;
        }
        let value = single_output(g, &node)?;
        if g.is_graph_output(value) {
            branch.outputs.push(value);
        }
        let next = match g.consumers(value) {
            [] if g.is_graph_output(value) => return Ok(branch),
            [] => {
                return Err(node.err(format!(
                    "output '{value}' of the class-label branch is neither used nor a graph output"
                )))
            }
            [one] => g
                .node(*one)
                .ok_or_else(|| node.err("internal: consumer index out of range"))?,
            [_, second, ..] => {
                let second = g
                    .node(*second)
                    .map(|s| s.node_ref().to_string())
                    .unwrap_or_default();
                return Err(node.err(format!(
                    "class-label value '{value}' is read by several nodes (including {second}); supported: one chain ArgMax -> ArrayFeatureExtractor -> Reshape/Cast"
                )));
            }
        };
        match (next.domain(), next.op()) {
            (Domain::Ml, "ArrayFeatureExtractor") => {
                if next.input(1) != Some(value) {
                    return Err(next.err("the class index is not its second input; supported: ArrayFeatureExtractor(classes, argmax)"));
                }
                if !branch.labels.is_empty() {
                    return Err(next.err("a second ArrayFeatureExtractor in the label branch"));
                }
                let classes = constant_input(g, &next, 0, "class labels")?;
                branch.labels = classes.labels().map_err(|e| next.err(e))?;
            }
            (Domain::Onnx, "Reshape" | "Cast" | "Identity" | "Squeeze" | "Flatten") => {
                if next.input(0) != Some(value) {
                    return Err(next.err("the class value is not its first input"));
                }
                for i in 1..next.inputs().len() {
                    if next.input(i).is_some() {
                        constant_input(g, &next, i, "shape")?;
                    }
                }
            }
            _ => return Err(next.unsupported("in the class-label branch after ArgMax (supported there: ArrayFeatureExtractor, Reshape, Cast, Identity, Squeeze, Flatten)")),
        }
        node = next;
    }
    Err(argmax.err("the class-label branch is longer than the graph"))
}
