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

const RAW_FORM: &str = "supported after a single raw score: Mul(s, -1) and Concat([-s, s], axis 1)";

/// Which of `a` and `b` (the two readers of `t`, itself a `what`) is the `op` node and which
/// the `Concat`.
fn op_and_concat<'g>(
    a: Node<'g>,
    b: Node<'g>,
    op: &str,
    t: &str,
    what: &str,
    form: &str,
) -> Result<(Node<'g>, Node<'g>), OnnxImportError> {
    let is = |n: &Node<'_>, op: &str| n.domain() == Domain::Onnx && n.op() == op;
    match (is(&a, op), is(&b, op), is(&a, "Concat"), is(&b, "Concat")) {
        (true, _, _, true) => Ok((a, b)),
        (_, true, true, _) => Ok((b, a)),
        _ => Err(b.err(format!(
            "the {what} '{t}' is read by {} and by this node; {form}",
            a.node_ref()
        ))),
    }
}

/// Input `k` of `node` is a constant holding the single value `value`.
fn single_constant(
    g: &GraphIndex<'_>,
    node: &Node<'_>,
    k: usize,
    value: f32,
    form: &str,
) -> Result<(), OnnxImportError> {
    let c = constant_input(g, node, k, &format!("constant {value}"))?;
    if c.len() == 1 && c.finite_floats().is_ok_and(|v| v.first() == Some(&value)) {
        Ok(())
    } else {
        Err(node.err(format!(
            "the constant '{}' is not a single {value:.1}; {form}",
            c.name
        )))
    }
}

/// The single output of `node`, which only `concat` reads; and `concat` joins over axis 1.
fn feeds_only<'g>(
    g: &GraphIndex<'g>,
    node: &Node<'g>,
    concat: &Node<'g>,
    form: &str,
) -> Result<&'g str, OnnxImportError> {
    let q = single_output(g, node)?;
    if g.consumers(q) != [concat.index] || g.is_graph_output(q) {
        return Err(node.err(format!(
            "its output '{q}' is used other than by the Concat; {form}"
        )));
    }
    let axis = attr::int_or(concat.proto, "axis", 0).map_err(|e| concat.err(e))?;
    if axis != 1 && axis != -1 {
        return Err(concat.err(format!("Concat over axis {axis}; {form}")));
    }
    Ok(q)
}

/// Marks `nodes` as taken into the model; returns the `Concat`'s output.
fn finish<'g>(
    g: &GraphIndex<'g>,
    nodes: [Node<'g>; 2],
    concat: &Node<'g>,
    visited: &mut [bool],
) -> Result<&'g str, OnnxImportError> {
    let out = single_output(g, concat)?;
    for n in nodes {
        if let Some(v) = visited.get_mut(n.index) {
            *v = true;
        }
    }
    Ok(out)
}

/// Recognises the two-class form on `p` read by `a` and `b`; returns the `Concat` output.
pub fn two_class<'g>(
    g: &GraphIndex<'g>,
    a: Node<'g>,
    b: Node<'g>,
    p: &'g str,
    visited: &mut [bool],
) -> Result<&'g str, OnnxImportError> {
    let (sub, concat) = op_and_concat(a, b, "Sub", p, "sigmoid output", FORM)?;
    if sub.inputs().len() != 2 || sub.input(1) != Some(p) {
        return Err(sub.err(format!("expected Sub(1, '{p}'); {FORM}")));
    }
    single_constant(g, &sub, 0, 1.0, FORM)?;
    let q = feeds_only(g, &sub, &concat, FORM)?;
    match concat.inputs() {
        [x, y] if x == q && y == p => {}
        [x, y] if x == p && y == q => {
            return Err(concat.err(format!(
                "puts the sigmoid output first ([p, 1 - p]), so class 0 would be the sigmoid's class; {FORM}"
            )))
        }
        _ => return Err(concat.err(format!("unexpected inputs; {FORM}"))),
    }
    finish(g, [sub, concat], &concat, visited)
}

/// Recognises the raw two-class form on the score `s` read by `a` and `b`; returns the
/// `Concat` output. The caller turns the layer into its two rows.
pub fn negated_pair<'g>(
    g: &GraphIndex<'g>,
    a: Node<'g>,
    b: Node<'g>,
    s: &'g str,
    visited: &mut [bool],
) -> Result<&'g str, OnnxImportError> {
    let (mul, concat) = op_and_concat(a, b, "Mul", s, "score", RAW_FORM)?;
    let k = match mul.inputs() {
        [x, _] if x == s => 1,
        [_, y] if y == s => 0,
        _ => return Err(mul.err(format!("expected Mul('{s}', -1); {RAW_FORM}"))),
    };
    single_constant(g, &mul, k, -1.0, RAW_FORM)?;
    let neg = feeds_only(g, &mul, &concat, RAW_FORM)?;
    match concat.inputs() {
        [x, y] if x == neg && y == s => {}
        _ => {
            return Err(concat.err(format!(
                "inputs are not [-s, s] (class 1's score second); {RAW_FORM}"
            )))
        }
    }
    finish(g, [mul, concat], &concat, visited)
}
