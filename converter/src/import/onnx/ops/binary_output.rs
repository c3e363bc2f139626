//! The two-class form of a sigmoid output, as scikit-learn exporters write it for binary
//! classifiers: `p = Sigmoid(z)` on one output, then `Sub(1, p)` and `Concat([1 - p, p])` to
//! give two probabilities. The model keeps the single sigmoid output (`OutputKind::Sigmoid`);
//! the two columns are `1 - p` and `p`.

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::graph_index::GraphIndex;
use super::super::node::{Domain, Node};
use super::{constant_input, single_output};

const FORM: &str = "supported after a Sigmoid output: Sub(1, p) and Concat([1 - p, p], axis 1)";

/// Recognises the two-class form on `p` read by `a` and `b`; returns the `Concat` output.
pub fn two_class<'g>(
    g: &GraphIndex<'g>,
    a: Node<'g>,
    b: Node<'g>,
    p: &'g str,
    visited: &mut [bool],
) -> Result<&'g str, OnnxImportError> {
    let is = |n: &Node<'_>, op: &str| n.domain() == Domain::Onnx && n.op() == op;
    let (sub, concat) = match (
        is(&a, "Sub"),
        is(&b, "Sub"),
        is(&a, "Concat"),
        is(&b, "Concat"),
    ) {
        (true, _, _, true) => (a, b),
        (_, true, true, _) => (b, a),
        _ => {
            return Err(b.err(format!(
                "the sigmoid output '{p}' is read by {} and by this node; {FORM}",
                a.node_ref()
            )))
        }
    };
    if sub.inputs().len() != 2 || sub.input(1) != Some(p) {
        return Err(sub.err(format!("expected Sub(1, '{p}'); {FORM}")));
    }
    let one = constant_input(g, &sub, 0, "constant 1")?;
    let ok = one.len() == 1 && one.finite_floats().is_ok_and(|v| v.first() == Some(&1.0));
    if !ok {
        return Err(sub.err(format!(
            "the constant '{}' is not a single 1.0; {FORM}",
            one.name
        )));
    }
    let q = single_output(g, &sub)?;
    if g.consumers(q) != [concat.index] || g.is_graph_output(q) {
        return Err(sub.err(format!(
            "its output '{q}' is used other than by the Concat; {FORM}"
        )));
    }
    let axis = attr::int_or(concat.proto, "axis", 0).map_err(|e| concat.err(e))?;
    if axis != 1 && axis != -1 {
        return Err(concat.err(format!("Concat over axis {axis}; {FORM}")));
    }
    match concat.inputs() {
        [x, y] if x == q && y == p => {}
        [x, y] if x == p && y == q => {
            return Err(concat.err(format!(
                "puts the sigmoid output first ([p, 1 - p]), so class 0 would be the sigmoid's class; {FORM}"
            )))
        }
        _ => return Err(concat.err(format!("unexpected inputs; {FORM}"))),
    }
    let out = single_output(g, &concat)?;
    for n in [sub, concat] {
        if let Some(v) = visited.get_mut(n.index) {
            *v = true;
        }
    }
    Ok(out)
}
