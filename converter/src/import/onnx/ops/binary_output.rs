//! The two-class forms scikit-learn exporters write for binary classifiers with one output:
//!
//! - a sigmoid output: `p = Sigmoid(z)`, then `Sub(1, p)` and `Concat([1 - p, p])` to give two
//!   probabilities. The model keeps the single sigmoid output (`OutputKind::Sigmoid`); the two
//!   columns are `1 - p` and `p`.
//! - raw scores (skl2onnx's binary hinge-loss `SGDClassifier`): `Mul(s, -1)` and
//!   `Concat([-s, s])`. The layer becomes two rows, `-w` and `w` with biases `-b` and `b`, which
//!   compute exactly `-s` and `s` (negation commutes with f32 rounding).

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

const RAW_FORM: &str = "supported after a single raw score: Mul(s, -1) and Concat([-s, s], axis 1)";

/// Recognises the raw two-class form on the score `s` read by `a` and `b`; returns the
/// `Concat` output. The caller turns the layer into its two rows.
pub fn negated_pair<'g>(
    g: &GraphIndex<'g>,
    a: Node<'g>,
    b: Node<'g>,
    s: &'g str,
    visited: &mut [bool],
) -> Result<&'g str, OnnxImportError> {
    let is = |n: &Node<'_>, op: &str| n.domain() == Domain::Onnx && n.op() == op;
    let (mul, concat) = match (
        is(&a, "Mul"),
        is(&b, "Mul"),
        is(&a, "Concat"),
        is(&b, "Concat"),
    ) {
        (true, _, _, true) => (a, b),
        (_, true, true, _) => (b, a),
        _ => {
            return Err(b.err(format!(
                "the score '{s}' is read by {} and by this node; {RAW_FORM}",
                a.node_ref()
            )))
        }
    };
    let k = match mul.inputs() {
        [x, _] if x == s => 1,
        [_, y] if y == s => 0,
        _ => return Err(mul.err(format!("expected Mul('{s}', -1); {RAW_FORM}"))),
    };
    let minus_one = constant_input(g, &mul, k, "constant -1")?;
    let ok = minus_one.len() == 1
        && minus_one
            .finite_floats()
            .is_ok_and(|v| v.first() == Some(&-1.0));
    if !ok {
        return Err(mul.err(format!(
            "the constant '{}' is not a single -1.0; {RAW_FORM}",
            minus_one.name
        )));
    }
    let neg = single_output(g, &mul)?;
    if g.consumers(neg) != [concat.index] || g.is_graph_output(neg) {
        return Err(mul.err(format!(
            "its output '{neg}' is used other than by the Concat; {RAW_FORM}"
        )));
    }
    let axis = attr::int_or(concat.proto, "axis", 0).map_err(|e| concat.err(e))?;
    if axis != 1 && axis != -1 {
        return Err(concat.err(format!("Concat over axis {axis}; {RAW_FORM}")));
    }
    match concat.inputs() {
        [x, y] if x == neg && y == s => {}
        _ => {
            return Err(concat.err(format!(
                "inputs are not [-s, s] (class 1's score second); {RAW_FORM}"
            )))
        }
    }
    let out = single_output(g, &concat)?;
    for n in [mul, concat] {
        if let Some(v) = visited.get_mut(n.index) {
            *v = true;
        }
    }
    Ok(out)
}
