//! Computations on the data's shape, as exporters write them for a flatten that keeps the
//! batch: `Reshape(x, Concat(Unsqueeze(Gather(Shape(x), 0)), [-1]))` (PyTorch's TorchScript
//! exporter for `x.view(x.size(0), -1)`), `Shape(start=0, end=1)`, `Squeeze`, `Reshape([-1])`,
//! `Concat` (PyTorch's torch.export-based exporter without its optimiser), `Shape`, `Cast`,
//! `Slice`, `Squeeze`, `Unsqueeze`, `Concat`, `Cast` (tf2onnx without its optimizers).
//!
//! The data's shape is known except for the batch size, so each such value is a short list of
//! dims that are either known sizes or "the batch size"; the ops below are evaluated on those
//! lists exactly (they only move and pick dims). A `Reshape` of the data by such a value then
//! keeps the batch when the batch size stands first. Anything else in such a computation is
//! refused with the node and op named.

use std::collections::HashMap;

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::graph_index::GraphIndex;
use super::super::node::{Domain, Node};
use super::super::proto::data_type as dt;
use super::super::tensor::TensorData;
use super::shape::{self, Shape};
use super::single_output;

/// One entry of a shape value.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dim {
    /// A known number.
    Known(i64),
    /// The batch size of the data, unknown at import.
    Batch,
}

/// A value computed from the data's shape: a scalar or a 1-D list.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ShapeValue {
    /// True for a rank-0 value (then `dims` has one entry).
    pub scalar: bool,
    /// The entries.
    pub dims: Vec<Dim>,
}

/// The ops evaluated here, for messages.
pub const SHAPE_OPS: &str = "Shape, Gather, Slice, Squeeze, Unsqueeze, Concat, Reshape, Cast (to an integer type), Identity";

/// The shape values met so far, by value name.
pub type ShapeValues<'g> = HashMap<&'g str, ShapeValue>;

/// `Shape(data)` with `start`/`end` (opset 15), for data of tracked shape `s` (dim 0 is the
/// batch).
fn shape_of(n: &Node<'_>, s: &[Option<usize>]) -> Result<ShapeValue, String> {
    let rank = s.len() as i64;
    let clamp = |v: i64| (if v < 0 { v + rank } else { v }).clamp(0, rank) as usize;
    let start = clamp(attr::int_or(n.proto, "start", 0)?);
    let end = clamp(attr::int_or(n.proto, "end", rank)?);
    let mut dims = Vec::new();
    for (k, d) in s.iter().enumerate().take(end).skip(start) {
        dims.push(match (k, d) {
            (0, _) => Dim::Batch,
            (_, Some(v)) => Dim::Known(*v as i64),
            (_, None) => {
                return Err(format!(
                    "dim {k} of the data's shape {} is not known; supported: a shape known except for the batch size",
                    shape::text(s)
                ))
            }
        });
    }
    Ok(ShapeValue {
        scalar: false,
        dims,
    })
}

/// An operand: a shape value met before, or an integer constant.
fn operand(
    g: &GraphIndex<'_>,
    values: &ShapeValues<'_>,
    name: &str,
) -> Option<Result<ShapeValue, String>> {
    if let Some(v) = values.get(name) {
        return Some(Ok(v.clone()));
    }
    let t = match g.constant(name)? {
        Ok(t) => t,
        Err(e) => return Some(Err(e)),
    };
    Some(match (&t.data, t.dims.len()) {
        (TensorData::Int(v), 0 | 1) => Ok(ShapeValue {
            scalar: t.dims.is_empty(),
            dims: v.iter().map(|&i| Dim::Known(i)).collect(),
        }),
        _ => Err(format!(
            "constant '{name}' of shape {} is not a 0-D or 1-D integer tensor",
            t.shape_text()
        )),
    })
}

fn known(v: &ShapeValue, what: &str) -> Result<Vec<i64>, String> {
    v.dims
        .iter()
        .map(|d| match d {
            Dim::Known(i) => Ok(*i),
            Dim::Batch => Err(format!("{what} depends on the batch size")),
        })
        .collect()
}

fn axes_of(n: &Node<'_>, input: Option<&ShapeValue>) -> Result<Option<Vec<i64>>, String> {
    match (attr::ints(n.proto, "axes")?, input) {
        (Some(a), None) => Ok(Some(a)),
        (None, Some(v)) => Ok(Some(known(v, "axes")?)),
        (None, None) => Ok(None),
        (Some(_), Some(_)) => Err("axes given both as an attribute and as an input".into()),
    }
}

/// Evaluates one op on shape values (`args`: the node's inputs, `None` when omitted).
fn eval(n: &Node<'_>, args: &[Option<ShapeValue>]) -> Result<ShapeValue, String> {
    let first = args
        .first()
        .and_then(Option::as_ref)
        .ok_or("the first input is missing")?;
    let arg = |i: usize| args.get(i).and_then(Option::as_ref);
    let vector = |dims: Vec<Dim>| ShapeValue {
        scalar: false,
        dims,
    };
    match n.op() {
        "Identity" => Ok(first.clone()),
        "Cast" => {
            let to = attr::int(n.proto, "to")?.unwrap_or(0);
            let ints = [
                dt::INT64,
                dt::INT32,
                dt::INT16,
                dt::INT8,
                dt::UINT64,
                dt::UINT32,
            ];
            if ints.contains(&(to as i32)) {
                Ok(first.clone())
            } else {
                Err(format!(
                    "Cast of a shape to {}; supported: to an integer type",
                    dt::name(to as i32)
                ))
            }
        }
        "Gather" => {
            let axis = attr::int_or(n.proto, "axis", 0)?;
            let idx = arg(1).ok_or("the indices are missing")?;
            if first.scalar || axis != 0 {
                return Err(format!(
                    "Gather on axis {axis} of a {}; supported: axis 0 of a 1-D shape",
                    if first.scalar { "scalar" } else { "shape" }
                ));
            }
            let len = first.dims.len() as i64;
            let dims = known(idx, "the indices")?
                .iter()
                .map(|&i| {
                    let k = if i < 0 { i + len } else { i };
                    usize::try_from(k)
                        .ok()
                        .and_then(|k| first.dims.get(k).copied())
                        .ok_or_else(|| format!("index {i} is out of range for {len} dims"))
                })
                .collect::<Result<Vec<_>, _>>()?;
            Ok(ShapeValue {
                scalar: idx.scalar,
                dims,
            })
        }
        "Slice" => {
            if first.scalar {
                return Err("Slice of a scalar".into());
            }
            let list = |i: usize, name: &str| -> Result<Option<Vec<i64>>, String> {
                match (arg(i), attr::ints(n.proto, name)?) {
                    (Some(v), _) => Ok(Some(known(v, name)?)),
                    (None, a) => Ok(a),
                }
            };
            let starts = list(1, "starts")?.ok_or("the starts are missing")?;
            let ends = list(2, "ends")?.ok_or("the ends are missing")?;
            let axes = list(3, "axes")?.unwrap_or_else(|| vec![0]);
            let steps = list(4, "steps")?.unwrap_or_else(|| vec![1]);
            let ([s], [e], [0 | -1], [1]) = (&starts[..], &ends[..], &axes[..], &steps[..]) else {
                return Err(format!(
                    "Slice with starts {starts:?}, ends {ends:?}, axes {axes:?}, steps {steps:?}; supported: one range of axis 0 with step 1"
                ));
            };
            let len = first.dims.len() as i64;
            let clamp = |v: i64| (if v < 0 { v + len } else { v }).clamp(0, len) as usize;
            let (a, b) = (clamp(*s), clamp(*e));
            Ok(vector(first.dims.get(a..b.max(a)).unwrap_or(&[]).to_vec()))
        }
        "Squeeze" => {
            let axes = axes_of(n, arg(1))?;
            match (first.scalar, first.dims.len(), axes.as_deref()) {
                (false, 1, None | Some([0 | -1])) => Ok(ShapeValue {
                    scalar: true,
                    dims: first.dims.clone(),
                }),
                _ => Err(format!(
                    "Squeeze of a shape value of {} dims with axes {axes:?}; supported: a one-element list to a scalar",
                    first.dims.len()
                )),
            }
        }
        "Unsqueeze" => {
            let axes = axes_of(n, arg(1))?;
            match (first.scalar, axes.as_deref()) {
                (true, Some([0 | -1])) => Ok(vector(first.dims.clone())),
                _ => Err(format!(
                    "Unsqueeze of a shape value with axes {axes:?}; supported: a scalar to a one-element list"
                )),
            }
        }
        "Reshape" => {
            let target = known(arg(1).ok_or("the shape is missing")?, "the target shape")?;
            match target.as_slice() {
                [-1] | [1] if first.dims.len() == 1 || target == [-1] => {
                    Ok(vector(first.dims.clone()))
                }
                [] if first.dims.len() == 1 => Ok(ShapeValue {
                    scalar: true,
                    dims: first.dims.clone(),
                }),
                _ => Err(format!(
                    "Reshape of a shape value to {target:?}; supported: to [-1], [1] or []"
                )),
            }
        }
        "Concat" => {
            let axis = attr::int_or(n.proto, "axis", 0)?;
            if axis != 0 && axis != -1 {
                return Err(format!("Concat on axis {axis}; supported: axis 0"));
            }
            let mut dims = Vec::new();
            for a in args {
                let a = a.as_ref().ok_or("an input is missing")?;
                if a.scalar {
                    return Err("Concat of a scalar".into());
                }
                dims.extend_from_slice(&a.dims);
            }
            Ok(vector(dims))
        }
        other => Err(format!("op {other} is not evaluated")),
    }
}

/// True when `n` is a `Shape` node.
pub fn is_shape(n: &Node<'_>) -> bool {
    n.domain() == Domain::Onnx && n.op() == "Shape"
}

/// Evaluates `Shape` node `start` on data of tracked shape `s`, then every node that reads only
/// shape values and constants, in dependency order; each evaluated node is marked in `visited`.
/// Nodes that also read other values (the data's `Reshape`) are left to the graph walk.
pub fn follow<'g>(
    g: &GraphIndex<'g>,
    start: Node<'g>,
    s: &Shape,
    values: &mut ShapeValues<'g>,
    visited: &mut [bool],
) -> Result<(), OnnxImportError> {
    let v = shape_of(&start, s).map_err(|e| start.err(e))?;
    let out = single_output(g, &start)?;
    if let Some(m) = visited.get_mut(start.index) {
        *m = true;
    }
    values.insert(out, v);
    let mut pending = vec![out];
    // Each value is pushed once, when its node is evaluated (each node at most once).
    while let Some(value) = pending.pop() {
        for &i in g.consumers(value) {
            let Some(n) = g.node(i) else { continue };
            if visited.get(i).copied().unwrap_or(true) {
                continue;
            }
            let mut args = Vec::with_capacity(n.inputs().len());
            let mut ready = true;
            for inp in n.inputs() {
                if inp.is_empty() {
                    args.push(None);
                    continue;
                }
                match operand(g, values, inp) {
                    Some(Ok(a)) => args.push(Some(a)),
                    Some(Err(e)) => {
                        return Err(n.err(format!("in a computation on the data's shape: {e}")))
                    }
                    None => {
                        ready = false;
                        break;
                    }
                }
            }
            // A node that also reads the data (or a value not computed yet) waits for the walk.
            if !ready {
                continue;
            }
            if n.domain() != Domain::Onnx {
                return Err(n.unsupported("in a computation on the data's shape"));
            }
            let v = eval(&n, &args).map_err(|e| {
                n.err(format!(
                    "in a computation on the data's shape: {e}; supported: {SHAPE_OPS}"
                ))
            })?;
            let out = single_output(g, &n)?;
            if let Some(m) = visited.get_mut(i) {
                *m = true;
            }
            values.insert(out, v);
            pending.push(out);
        }
    }
    Ok(())
}

/// The target of a data `Reshape` by a shape value, as `Reshape` integers: the batch size,
/// allowed only first, becomes `0` (copy the data's dim 0, which is the batch).
pub fn reshape_target(v: &ShapeValue) -> Result<Vec<i64>, String> {
    v.dims
        .iter()
        .enumerate()
        .map(|(k, d)| match (k, d) {
            (_, Dim::Known(i)) => Ok(*i),
            (0, Dim::Batch) => Ok(0),
            _ => Err(format!(
                "the target shape has the batch size at position {k}; supported: the batch size first"
            )),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::super::super::proto::{attr_type, AttributeProto, NodeProto};
    use super::super::super::test_graph::*;
    use super::*;

    fn n(p: &NodeProto) -> Node<'_> {
        Node { proto: p, index: 0 }
    }

    fn v(scalar: bool, dims: &[Dim]) -> Option<ShapeValue> {
        Some(ShapeValue {
            scalar,
            dims: dims.to_vec(),
        })
    }

    fn k(i: i64) -> Dim {
        Dim::Known(i)
    }

    fn ints_attr(name: &str, v: &[i64]) -> AttributeProto {
        AttributeProto {
            name: Some(name.into()),
            ints: v.to_vec(),
            r#type: Some(attr_type::INTS),
            ..Default::default()
        }
    }

    #[test]
    fn shape_with_start_and_end() {
        let s = [None, Some(8), Some(8)];
        let p = node("s", "Shape", &["x"], &["y"]);
        assert_eq!(
            shape_of(&n(&p), &s).unwrap().dims,
            vec![Dim::Batch, k(8), k(8)]
        );
        let p = with_attr(
            with_attr(node("s", "Shape", &["x"], &["y"]), attr_int("start", 0)),
            attr_int("end", 1),
        );
        assert_eq!(shape_of(&n(&p), &s).unwrap().dims, vec![Dim::Batch]);
        let p = with_attr(node("s", "Shape", &["x"], &["y"]), attr_int("start", -2));
        assert_eq!(shape_of(&n(&p), &s).unwrap().dims, vec![k(8), k(8)]);
        assert!(
            shape_of(&n(&node("s", "Shape", &["x"], &["y"])), &[None, None])
                .unwrap_err()
                .contains("not known")
        );
    }

    #[test]
    fn torch_view_batch_minus_one() {
        // Gather(Shape(x), 0) -> Unsqueeze(axes [0]) -> Concat with [-1].
        let shape = v(false, &[Dim::Batch, k(8), k(8)]);
        let gather = node("g", "Gather", &["s", "i"], &["b"]);
        let b = eval(&n(&gather), &[shape.clone(), v(true, &[k(0)])]).unwrap();
        assert_eq!(b, v(true, &[Dim::Batch]).unwrap());
        let un = with_attr(
            node("u", "Unsqueeze", &["b"], &["b1"]),
            ints_attr("axes", &[0]),
        );
        let b1 = eval(&n(&un), &[Some(b)]).unwrap();
        let cat = with_attr(
            node("c", "Concat", &["b1", "m"], &["t"]),
            attr_int("axis", 0),
        );
        let t = eval(&n(&cat), &[Some(b1), v(false, &[k(-1)])]).unwrap();
        assert_eq!(reshape_target(&t).unwrap(), vec![0, -1]);
    }

    #[test]
    fn slice_squeeze_reshape_cast() {
        let shape = v(false, &[Dim::Batch, k(8), k(8)]);
        let sl = node("sl", "Slice", &["s", "a", "b", "ax"], &["o"]);
        let one = eval(
            &n(&sl),
            &[
                shape.clone(),
                v(false, &[k(0)]),
                v(false, &[k(1)]),
                v(false, &[k(0)]),
            ],
        )
        .unwrap();
        assert_eq!(one.dims, vec![Dim::Batch]);
        let sq = node("q", "Squeeze", &["o"], &["q"]);
        assert!(eval(&n(&sq), &[Some(one.clone())]).unwrap().scalar);
        let r = node("r", "Reshape", &["q", "m"], &["r"]);
        let back = eval(&n(&r), &[v(true, &[Dim::Batch]), v(false, &[k(-1)])]).unwrap();
        assert_eq!(back, one);
        let c = with_attr(node("c", "Cast", &["o"], &["c"]), attr_int("to", 6));
        assert_eq!(eval(&n(&c), &[Some(one.clone())]).unwrap(), one);
        let f = with_attr(node("c", "Cast", &["o"], &["c"]), attr_int("to", 1));
        assert!(eval(&n(&f), &[Some(one)]).unwrap_err().contains("FLOAT"));
        let step2 = node("sl", "Slice", &["s", "a", "b", "ax", "st"], &["o"]);
        assert!(eval(
            &n(&step2),
            &[
                shape,
                v(false, &[k(0)]),
                v(false, &[k(3)]),
                v(false, &[k(0)]),
                v(false, &[k(2)])
            ]
        )
        .unwrap_err()
        .contains("step 1"));
    }

    #[test]
    fn batch_only_first_and_unknown_ops_refused() {
        assert!(reshape_target(&ShapeValue {
            scalar: false,
            dims: vec![k(-1), Dim::Batch]
        })
        .unwrap_err()
        .contains("position 1"));
        let mul = node("m", "Mul", &["a", "b"], &["c"]);
        assert!(eval(&n(&mul), &[v(true, &[Dim::Batch]), v(true, &[k(2)])]).is_err());
    }
}
