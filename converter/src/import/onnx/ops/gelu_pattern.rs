//! The decomposed `Gelu` exporters write for opsets before 20 (the ONNX `Gelu` op came with
//! opset 20): `x · ½ · (1 + erf(x / √2))` as `Div(x, √2)` (or `Mul(x, 1/√2)`), `Erf`,
//! `Add(·, 1)`, and the two products with `x` and `½` in either order (PyTorch's exporter
//! writes `Mul(x, ·)` then `Mul(·, 0.5)`). Matched by structure, with each constant a scalar
//! equal to its exact value to within 1e-6 relative (an f32 rounding of √2 is 3e-8 off); then
//! the layer's activation is the Gelu, computed as `x/2 · (1 + erf(x/√2))`. Any other shape
//! at the fork is left to the walk, which refuses it.

use super::super::graph_index::GraphIndex;
use super::super::node::{Domain, Node};

/// The value `v` is a scalar constant within 1e-6 relative of `want`.
fn is_scalar(g: &GraphIndex<'_>, v: &str, want: f64) -> bool {
    match g.constant(v) {
        Some(Ok(t)) => {
            matches!(t.finite_floats(), Ok([c]) if (f64::from(*c) - want).abs() <= 1e-6 * want.abs())
        }
        _ => false,
    }
}

/// The other input of a two-input node `n` when one input is `v`.
fn other<'g>(n: &Node<'g>, v: &str) -> Option<&'g str> {
    match (n.input(0), n.input(1)) {
        (Some(a), Some(b)) if a == v => Some(b),
        (Some(a), Some(b)) if b == v => Some(a),
        _ => None,
    }
}

fn op_is(n: &Node<'_>, op: &str) -> bool {
    n.domain() == Domain::Onnx && n.op() == op && n.proto.input.len() == 2
        || (op == "Erf" && n.domain() == Domain::Onnx && n.op() == "Erf")
}

/// The single consumer of `v`.
fn only_consumer<'g>(g: &GraphIndex<'g>, v: &str) -> Option<Node<'g>> {
    match g.consumers(v) {
        [i] => g.node(*i),
        _ => None,
    }
}

fn out<'g>(n: &Node<'g>) -> Option<&'g str> {
    n.outputs()
        .first()
        .map(String::as_str)
        .filter(|s| !s.is_empty())
}

/// If the two consumers `a`, `b` of `x` compute Gelu(x): the nodes of the pattern and its
/// output value.
pub fn match_gelu<'g>(
    g: &GraphIndex<'g>,
    x: &str,
    a: Node<'g>,
    b: Node<'g>,
) -> Option<(Vec<usize>, &'g str)> {
    [(a, b), (b, a)]
        .into_iter()
        .find_map(|(scale, prod)| try_order(g, x, scale, prod))
}

fn try_order<'g>(
    g: &GraphIndex<'g>,
    x: &str,
    scale: Node<'g>,
    prod: Node<'g>,
) -> Option<(Vec<usize>, &'g str)> {
    let sqrt2 = std::f64::consts::SQRT_2;
    // x / √2 or x · (1/√2), then Erf, then + 1.
    let c = other(&scale, x)?;
    let scaled = (op_is(&scale, "Div") && scale.input(0) == Some(x) && is_scalar(g, c, sqrt2))
        || (op_is(&scale, "Mul") && is_scalar(g, c, 1.0 / sqrt2));
    if !scaled {
        return None;
    }
    let erf = only_consumer(g, out(&scale)?)?;
    if !op_is(&erf, "Erf") || erf.input(0) != out(&scale) {
        return None;
    }
    let add = only_consumer(g, out(&erf)?)?;
    let erf_out = out(&erf)?;
    if !op_is(&add, "Add") || !is_scalar(g, other(&add, erf_out)?, 1.0) {
        return None;
    }
    let p = out(&add)?;
    // Either Mul(x, p) then Mul(·, ½), or Mul(x, ½) then Mul(·, p).
    if !op_is(&prod, "Mul") {
        return None;
    }
    let first = other(&prod, x)?;
    let last = only_consumer(g, out(&prod)?)?;
    if !op_is(&last, "Mul") {
        return None;
    }
    let rest = other(&last, out(&prod)?)?;
    let ok = (first == p && is_scalar(g, rest, 0.5)) || (is_scalar(g, first, 0.5) && rest == p);
    // In the second order the sum `p` also feeds `last`: it must have no other reader.
    let p_readers = g.consumers(p).len();
    if !ok || p_readers != 1 {
        return None;
    }
    Some((
        vec![scale.index, erf.index, add.index, prod.index, last.index],
        out(&last)?,
    ))
}
