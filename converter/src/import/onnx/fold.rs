//! Constant folding at import: a node that does not depend on the data input computes a
//! constant, and when its op is one of a few exact data-movement ops it is evaluated here, so
//! that the graph walk sees its output as one more constant (like an initializer).
//!
//! Exporters write such nodes for weights: PyTorch's exporter with constant folding off gives
//! `Transpose(fc.weight)` before `Gemm`, and `Identity` chains for shared or renamed
//! parameters; tf2onnx gives `Transpose` or `Cast` of an initializer and `Reshape` shapes
//! through `Constant`/`Cast`. Every op folded here is exact (no arithmetic, so no rounding that
//! could differ from the model's own), following the ONNX operator specification:
//!
//! - `Identity`: the input.
//! - `Transpose(perm)`: `perm` defaults to the reversed axes.
//! - `Cast(to)`: float to `FLOAT`/`DOUBLE` (the model computes in f32), integers to `FLOAT`/
//!   `DOUBLE` (rounded to nearest f32), integers to an integer type or `BOOL` when every value
//!   fits, floats to an integer type only when every value is a whole number in range
//!   (so no rounding rule is guessed). Anything else is refused.
//! - `Reshape(data, shape)`: `0` copies the input's dim (unless `allowzero = 1`), one `-1` is
//!   inferred.
//! - `Flatten(axis)`, `Squeeze(axes)`, `Unsqueeze(axes)`: axes as an attribute (before opset 13)
//!   or as the second input (from opset 13).
//!
//! Any other op on constants is refused by the caller with the node and op named: it is not
//! folded, never approximated.

use super::attr;
use super::node::{Domain, Node};
use super::proto::data_type as dt;
use super::tensor::{Tensor, TensorData};

/// The ops folded at import, for messages.
pub const FOLDABLE_OPS: &str = "Identity, Transpose, Cast, Reshape, Flatten, Squeeze, Unsqueeze";

/// True when `n`'s op is one that [`fold`] evaluates.
pub fn is_foldable(n: &Node<'_>) -> bool {
    n.domain() == Domain::Onnx
        && matches!(
            n.op(),
            "Identity" | "Transpose" | "Cast" | "Reshape" | "Flatten" | "Squeeze" | "Unsqueeze"
        )
}

/// Evaluates node `n` on its constant inputs (`None` for an omitted optional input) and
/// returns its one output, named after it. Errors are plain descriptions; the caller names the
/// node.
pub fn fold(n: &Node<'_>, inputs: &[Option<Tensor>]) -> Result<Tensor, String> {
    let data = inputs
        .first()
        .and_then(Option::as_ref)
        .ok_or("the first input is missing")?;
    let second = inputs.get(1).and_then(Option::as_ref);
    let (dims, values) = match n.op() {
        "Identity" => (data.dims.clone(), data.data.clone()),
        "Transpose" => transpose(n, data)?,
        "Cast" => (data.dims.clone(), cast(n, data)?),
        "Reshape" => {
            let shape = second.ok_or("the shape input is missing")?;
            let allow_zero = attr::int_or(n.proto, "allowzero", 0)? != 0;
            let dims = reshape_dims(&data.dims, shape.ints()?, allow_zero)?;
            (dims, data.data.clone())
        }
        "Flatten" => {
            let axis = attr::int_or(n.proto, "axis", 1)?;
            // Flatten's axis is in [-rank, rank]: rank itself puts every dim in front.
            let rank = data.dims.len();
            let a = if axis == rank as i64 {
                rank
            } else {
                axis_index(axis, rank, "axis")?
            };
            let (front, back) = data.dims.split_at(a);
            (
                vec![front.iter().product(), back.iter().product()],
                data.data.clone(),
            )
        }
        "Squeeze" => (
            squeeze_dims(&data.dims, axes(n, second)?.as_deref())?,
            data.data.clone(),
        ),
        "Unsqueeze" => {
            let axes = axes(n, second)?.ok_or("the axes are missing")?;
            (unsqueeze_dims(&data.dims, &axes)?, data.data.clone())
        }
        other => return Err(format!("op {other} is not folded")),
    };
    let name = n
        .outputs()
        .first()
        .cloned()
        .ok_or("the node has no output")?;
    Ok(Tensor {
        name,
        dims,
        data: values,
    })
}

/// `axes` from the attribute (before opset 13) or the second input (from opset 13).
fn axes(n: &Node<'_>, input: Option<&Tensor>) -> Result<Option<Vec<i64>>, String> {
    match (attr::ints(n.proto, "axes")?, input) {
        (Some(_), Some(_)) => Err("axes given both as an attribute and as an input".into()),
        (Some(a), None) => Ok(Some(a)),
        (None, Some(t)) => Ok(Some(t.ints()?.to_vec())),
        (None, None) => Ok(None),
    }
}

/// An axis in `[-rank, rank)` as an index.
fn axis_index(axis: i64, rank: usize, what: &str) -> Result<usize, String> {
    let r = rank as i64;
    let a = if axis < 0 { axis + r } else { axis };
    if a < 0 || a >= r {
        return Err(format!("{what} {axis} is out of range for rank {}", rank));
    }
    Ok(a as usize)
}

fn transpose(n: &Node<'_>, t: &Tensor) -> Result<(Vec<usize>, TensorData), String> {
    let rank = t.dims.len();
    let perm: Vec<usize> = match attr::ints(n.proto, "perm")? {
        None => (0..rank).rev().collect(),
        Some(p) => p
            .iter()
            .map(|&a| axis_index(a, rank, "perm entry"))
            .collect::<Result<_, _>>()?,
    };
    let mut seen = vec![false; rank];
    for &p in &perm {
        match seen.get_mut(p) {
            Some(s) if !*s => *s = true,
            _ => return Err(format!("perm {perm:?} is not a permutation of 0..{rank}")),
        }
    }
    if perm.len() != rank {
        return Err(format!("perm {perm:?} is not a permutation of 0..{rank}"));
    }
    let out_dims: Vec<usize> = perm
        .iter()
        .filter_map(|&p| t.dims.get(p).copied())
        .collect();
    // Row-major strides of the input, in the output's axis order.
    let mut strides = vec![1usize; rank];
    for k in (0..rank.saturating_sub(1)).rev() {
        let next =
            strides.get(k + 1).copied().unwrap_or(1) * t.dims.get(k + 1).copied().unwrap_or(1);
        if let Some(s) = strides.get_mut(k) {
            *s = next;
        }
    }
    let picked: Vec<usize> = perm
        .iter()
        .filter_map(|&p| strides.get(p).copied())
        .collect();
    let order = source_order(&out_dims, &picked);
    let data = match &t.data {
        TensorData::Float(v) => {
            TensorData::Float(order.iter().filter_map(|&i| v.get(i).copied()).collect())
        }
        TensorData::Int(v) => {
            TensorData::Int(order.iter().filter_map(|&i| v.get(i).copied()).collect())
        }
        TensorData::Str(v) => {
            TensorData::Str(order.iter().filter_map(|&i| v.get(i).cloned()).collect())
        }
    };
    Ok((out_dims, data))
}

/// For each element of an output of shape `dims` (row-major), the flat index of its source,
/// given the source strides along each output axis.
fn source_order(dims: &[usize], strides: &[usize]) -> Vec<usize> {
    let total: usize = dims.iter().product();
    let mut out = Vec::with_capacity(total);
    let mut idx = vec![0usize; dims.len()];
    for _ in 0..total {
        out.push(idx.iter().zip(strides).map(|(i, s)| i * s).sum());
        // Odometer step, last axis fastest.
        for k in (0..dims.len()).rev() {
            let (Some(i), Some(&d)) = (idx.get_mut(k), dims.get(k)) else {
                break;
            };
            *i += 1;
            if *i < d {
                break;
            }
            *i = 0;
        }
    }
    out
}

/// The range of an integer data type, `None` for non-integer types.
fn int_range(ty: i32) -> Option<(i64, i64)> {
    Some(match ty {
        dt::INT8 => (i64::from(i8::MIN), i64::from(i8::MAX)),
        dt::UINT8 => (0, i64::from(u8::MAX)),
        dt::INT16 => (i64::from(i16::MIN), i64::from(i16::MAX)),
        dt::UINT16 => (0, i64::from(u16::MAX)),
        dt::INT32 => (i64::from(i32::MIN), i64::from(i32::MAX)),
        dt::UINT32 => (0, i64::from(u32::MAX)),
        dt::INT64 | dt::UINT64 => (if ty == dt::INT64 { i64::MIN } else { 0 }, i64::MAX),
        _ => return None,
    })
}

fn cast(n: &Node<'_>, t: &Tensor) -> Result<TensorData, String> {
    let to = attr::int(n.proto, "to")?.ok_or("attribute 'to' is missing")?;
    let to = i32::try_from(to).map_err(|_| format!("attribute 'to' = {to} is not a data type"))?;
    let refuse = |from: &str| {
        Err(format!(
            "Cast of a {from} constant to {} is not folded; folded: to FLOAT or DOUBLE from float or integer, to an integer type or BOOL from integers that fit or whole floats",
            dt::name(to)
        ))
    };
    match (&t.data, to) {
        (TensorData::Float(v), dt::FLOAT | dt::DOUBLE) => Ok(TensorData::Float(v.clone())),
        (TensorData::Int(v), dt::FLOAT | dt::DOUBLE) => {
            // Rust's integer-to-float `as` rounds to nearest, ties to even (IEEE 754).
            Ok(TensorData::Float(v.iter().map(|&i| i as f32).collect()))
        }
        (TensorData::Int(v), dt::BOOL) => Ok(TensorData::Int(
            v.iter().map(|&i| i64::from(i != 0)).collect(),
        )),
        (TensorData::Float(v), dt::BOOL) => Ok(TensorData::Int(
            v.iter().map(|&x| i64::from(x != 0.0)).collect(),
        )),
        (TensorData::Int(v), ty) if int_range(ty).is_some() => {
            let (lo, hi) = int_range(ty).unwrap_or((i64::MIN, i64::MAX));
            match v.iter().find(|&&i| i < lo || i > hi) {
                Some(i) => Err(format!(
                    "Cast of {i} to {} does not fit; supported: values in range",
                    dt::name(ty)
                )),
                None => Ok(TensorData::Int(v.clone())),
            }
        }
        (TensorData::Float(v), ty) if int_range(ty).is_some() => {
            let (lo, hi) = int_range(ty).unwrap_or((i64::MIN, i64::MAX));
            v.iter()
                .map(|&x| {
                    let whole = x.is_finite() && x.fract() == 0.0;
                    // i64 bounds as f64 are exact for every range above except INT64's upper one,
                    // which rounds up to 2^63: the strict comparison keeps it out.
                    let inside = f64::from(x) >= lo as f64 && f64::from(x) < (hi as f64) + 1.0;
                    if whole && inside {
                        Ok(x as i64)
                    } else {
                        Err(format!(
                            "Cast of {x} to {} is not exact; supported: whole numbers in the type's range",
                            dt::name(ty)
                        ))
                    }
                })
                .collect::<Result<Vec<_>, _>>()
                .map(TensorData::Int)
        }
        (TensorData::Float(_), _) => refuse("float"),
        (TensorData::Int(_), _) => refuse("integer"),
        (TensorData::Str(_), _) => refuse("string"),
    }
}

/// The output dims of `Reshape` of `dims` to `target`.
pub fn reshape_dims(
    dims: &[usize],
    target: &[i64],
    allow_zero: bool,
) -> Result<Vec<usize>, String> {
    let total: usize = dims.iter().product();
    let mut out = Vec::with_capacity(target.len());
    let mut inferred = None;
    for (k, &t) in target.iter().enumerate() {
        match t {
            -1 if inferred.is_none() => {
                inferred = Some(k);
                out.push(1);
            }
            -1 => return Err(format!("shape {target:?} has more than one -1")),
            0 if !allow_zero => out.push(*dims.get(k).ok_or_else(|| {
                format!(
                    "shape {target:?} copies dim {k} (0) of a rank-{} tensor",
                    dims.len()
                )
            })?),
            t if t >= 0 => out.push(t as usize),
            t => return Err(format!("shape {target:?} has the negative entry {t}")),
        }
    }
    let known = out
        .iter()
        .try_fold(1usize, |a, &d| a.checked_mul(d))
        .ok_or("the shape overflows")?;
    if let Some(k) = inferred {
        if known == 0 || !total.is_multiple_of(known) {
            return Err(format!(
                "cannot infer the -1 of shape {target:?} for {total} elements"
            ));
        }
        if let Some(d) = out.get_mut(k) {
            *d = total / known;
        }
    } else if known != total {
        return Err(format!(
            "shape {target:?} has {known} elements, the data {dims:?} has {total}"
        ));
    }
    Ok(out)
}

fn squeeze_dims(dims: &[usize], axes: Option<&[i64]>) -> Result<Vec<usize>, String> {
    let Some(axes) = axes else {
        return Ok(dims.iter().copied().filter(|&d| d != 1).collect());
    };
    let drop: Vec<usize> = axes
        .iter()
        .map(|&a| axis_index(a, dims.len(), "axis"))
        .collect::<Result<_, _>>()?;
    if let Some(&a) = drop.iter().find(|&&a| dims.get(a) != Some(&1)) {
        return Err(format!(
            "Squeeze of axis {a} of shape {dims:?}, whose size is not 1"
        ));
    }
    Ok(dims
        .iter()
        .enumerate()
        .filter(|(k, _)| !drop.contains(k))
        .map(|(_, &d)| d)
        .collect())
}

fn unsqueeze_dims(dims: &[usize], axes: &[i64]) -> Result<Vec<usize>, String> {
    let rank = dims.len() + axes.len();
    let mut insert: Vec<usize> = axes
        .iter()
        .map(|&a| axis_index(a, rank, "axis"))
        .collect::<Result<_, _>>()?;
    insert.sort_unstable();
    if insert.windows(2).any(|w| matches!(w, [a, b] if a == b)) {
        return Err(format!("axes {axes:?} repeat an axis"));
    }
    let mut rest = dims.iter();
    Ok((0..rank)
        .map(|k| {
            if insert.contains(&k) {
                1
            } else {
                rest.next().copied().unwrap_or(1)
            }
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::super::proto::NodeProto;
    use super::super::test_graph::*;
    use super::*;

    fn t(dims: &[usize], v: &[f32]) -> Tensor {
        Tensor {
            name: "w".into(),
            dims: dims.to_vec(),
            data: TensorData::Float(v.to_vec()),
        }
    }

    fn ints_t(v: &[i64]) -> Tensor {
        Tensor {
            name: "s".into(),
            dims: vec![v.len()],
            data: TensorData::Int(v.to_vec()),
        }
    }

    fn run(p: &NodeProto, inputs: &[Option<Tensor>]) -> Result<Tensor, String> {
        fold(&Node { proto: p, index: 0 }, inputs)
    }

    fn ints_attr(name: &str, v: &[i64]) -> super::super::proto::AttributeProto {
        super::super::proto::AttributeProto {
            name: Some(name.into()),
            ints: v.to_vec(),
            r#type: Some(super::super::proto::attr_type::INTS),
            ..Default::default()
        }
    }

    #[test]
    fn transpose_of_a_matrix_and_of_rank_3() {
        // [[1, 2, 3], [4, 5, 6]]^T = [[1, 4], [2, 5], [3, 6]].
        let p = node("tr", "Transpose", &["w"], &["wt"]);
        let out = run(&p, &[Some(t(&[2, 3], &[1., 2., 3., 4., 5., 6.]))]).unwrap();
        assert_eq!(out.dims, vec![3, 2]);
        assert_eq!(out.data, TensorData::Float(vec![1., 4., 2., 5., 3., 6.]));
        assert_eq!(out.name, "wt");
        // Shape [2, 1, 3] with perm [2, 0, 1]: out[k][i][j] = in[i][j][k]; worked by hand.
        let p = with_attr(
            node("tr", "Transpose", &["w"], &["o"]),
            ints_attr("perm", &[2, 0, 1]),
        );
        let out = run(&p, &[Some(t(&[2, 1, 3], &[1., 2., 3., 4., 5., 6.]))]).unwrap();
        assert_eq!(out.dims, vec![3, 2, 1]);
        assert_eq!(out.data, TensorData::Float(vec![1., 4., 2., 5., 3., 6.]));
        let bad = with_attr(
            node("tr", "Transpose", &["w"], &["o"]),
            ints_attr("perm", &[0, 0]),
        );
        assert!(run(&bad, &[Some(t(&[2, 3], &[0.; 6]))])
            .unwrap_err()
            .contains("permutation"));
    }

    #[test]
    fn reshape_flatten_squeeze_unsqueeze() {
        let p = node("r", "Reshape", &["w", "s"], &["o"]);
        let out = run(&p, &[Some(t(&[2, 3], &[0.; 6])), Some(ints_t(&[-1, 2]))]).unwrap();
        assert_eq!(out.dims, vec![3, 2]);
        assert_eq!(reshape_dims(&[2, 3], &[0, -1], false).unwrap(), vec![2, 3]);
        assert!(reshape_dims(&[2, 3], &[0, -1], true).is_err());
        assert!(reshape_dims(&[2, 3], &[4, -1], false)
            .unwrap_err()
            .contains("infer"));
        assert!(reshape_dims(&[2, 3], &[-1, -1], false).is_err());
        assert!(reshape_dims(&[2, 3], &[5], false).is_err());

        let f = node("f", "Flatten", &["w"], &["o"]);
        assert_eq!(
            run(&f, &[Some(t(&[2, 3, 4], &[0.; 24]))]).unwrap().dims,
            vec![2, 12]
        );

        // Opset 13 form: axes as an input; before 13: as an attribute.
        let sq = node("q", "Squeeze", &["w", "a"], &["o"]);
        let out = run(&sq, &[Some(t(&[1, 3, 1], &[0.; 3])), Some(ints_t(&[0]))]).unwrap();
        assert_eq!(out.dims, vec![3, 1]);
        let sq_all = node("q", "Squeeze", &["w"], &["o"]);
        assert_eq!(
            run(&sq_all, &[Some(t(&[1, 3, 1], &[0.; 3]))]).unwrap().dims,
            vec![3]
        );
        let sq_bad = with_attr(
            node("q", "Squeeze", &["w"], &["o"]),
            ints_attr("axes", &[1]),
        );
        assert!(run(&sq_bad, &[Some(t(&[1, 3], &[0.; 3]))])
            .unwrap_err()
            .contains("not 1"));
        let un = with_attr(
            node("u", "Unsqueeze", &["w"], &["o"]),
            ints_attr("axes", &[0, -1]),
        );
        assert_eq!(
            run(&un, &[Some(t(&[3], &[0.; 3]))]).unwrap().dims,
            vec![1, 3, 1]
        );
        let un_none = node("u", "Unsqueeze", &["w"], &["o"]);
        assert!(run(&un_none, &[Some(t(&[3], &[0.; 3]))]).is_err());
    }

    #[test]
    fn casts_are_exact_or_refused() {
        let to = |ty: i32| {
            with_attr(
                node("c", "Cast", &["w"], &["o"]),
                attr_int("to", i64::from(ty)),
            )
        };
        let out = run(&to(dt::FLOAT), &[Some(ints_t(&[-1, 784]))]).unwrap();
        assert_eq!(out.data, TensorData::Float(vec![-1.0, 784.0]));
        let out = run(&to(dt::INT64), &[Some(t(&[2], &[-1.0, 64.0]))]).unwrap();
        assert_eq!(out.data, TensorData::Int(vec![-1, 64]));
        assert!(run(&to(dt::INT64), &[Some(t(&[1], &[0.5]))])
            .unwrap_err()
            .contains("not exact"));
        assert!(run(&to(dt::INT8), &[Some(ints_t(&[200]))])
            .unwrap_err()
            .contains("does not fit"));
        assert!(run(&to(dt::UINT8), &[Some(t(&[1], &[-1.0]))]).is_err());
        assert!(run(&to(dt::INT64), &[Some(t(&[1], &[9.3e18]))]).is_err());
        assert!(run(&to(dt::FLOAT16), &[Some(t(&[1], &[1.0]))])
            .unwrap_err()
            .contains("FLOAT16"));
        assert_eq!(
            run(&to(dt::BOOL), &[Some(ints_t(&[0, 3]))]).unwrap().data,
            TensorData::Int(vec![0, 1])
        );
    }

    #[test]
    fn only_the_listed_ops_fold() {
        let relu = node("r", "Relu", &["w"], &["o"]);
        assert!(!is_foldable(&Node {
            proto: &relu,
            index: 0
        }));
        assert!(run(&relu, &[Some(t(&[1], &[1.0]))]).is_err());
        let id = node("i", "Identity", &["w"], &["o"]);
        assert!(is_foldable(&Node {
            proto: &id,
            index: 0
        }));
        let mut ml = id.clone();
        ml.domain = Some("ai.onnx.ml".into());
        assert!(!is_foldable(&Node {
            proto: &ml,
            index: 0
        }));
    }
}
