//! Dense layers from `MatMul` (+ `Add`) and `Gemm`, laid out row-major `[outputs][inputs]`.

use crate::graph::{Activation, DenseLayer};

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::Walk;
use super::super::tensor::Tensor;
use super::{constant_input, optional_constant};

/// Reads a 2-D float weight matrix `[rows, cols]`.
fn matrix<'t>(w: &'t Tensor, what: &str) -> Result<(usize, usize, &'t [f32]), String> {
    let v = w.finite_floats()?;
    match w.dims.as_slice() {
        [r, c] if *r > 0 && *c > 0 => Ok((*r, *c, v)),
        _ => Err(format!(
            "{what} '{}' has shape {}; supported: a 2-D matrix with no zero dimension",
            w.name,
            w.shape_text()
        )),
    }
}

/// Transposes a row-major `[rows, cols]` matrix into `[cols, rows]`.
fn transpose(v: &[f32], rows: usize, cols: usize) -> Vec<f32> {
    let mut t = Vec::with_capacity(v.len());
    for c in 0..cols {
        t.extend((0..rows).filter_map(|r| v.get(r * cols + c)));
    }
    t
}

/// The dense layer of `x @ W` with `W` of shape `[in, out]`, bias zero.
pub fn from_matmul(w: &Tensor) -> Result<DenseLayer, String> {
    let (inputs, outputs, v) = matrix(w, "MatMul weight")?;
    Ok(DenseLayer {
        inputs,
        outputs,
        weights: transpose(v, inputs, outputs),
        bias: vec![0.0; outputs],
        activation: Activation::Linear,
    })
}

/// A constant broadcast against `[N, width]` as one row: shape `[]`, `[1]`, `[width]` or
/// `[1, width]`.
pub fn broadcast_row(t: &Tensor, width: usize, what: &str) -> Result<Vec<f32>, String> {
    let v = t.finite_floats()?;
    let ok = match t.dims.as_slice() {
        [] | [1] | [1, 1] => true,
        [w] | [1, w] => *w == width,
        _ => false,
    };
    if !ok {
        return Err(format!(
            "{what} '{}' has shape {}; supported: [{width}], [1, {width}] or a single value",
            t.name,
            t.shape_text()
        ));
    }
    Ok(match v {
        [one] => vec![*one; width],
        _ => v.to_vec(),
    })
}

/// Adds a constant bias (shape as in [`broadcast_row`]) to a layer.
pub fn add_bias(layer: &mut DenseLayer, c: &Tensor) -> Result<(), String> {
    let b = broadcast_row(c, layer.outputs, "bias")?;
    for (acc, v) in layer.bias.iter_mut().zip(b) {
        *acc += v;
        if !acc.is_finite() {
            return Err("the bias overflows f32".into());
        }
    }
    Ok(())
}

/// The dense layer of `Gemm`: `alpha * x @ op(B) + beta * C`, with `op(B) = B` (`[in, out]`)
/// or `B^T` (`B` is `[out, in]`) when `trans_b`. `C` is optional.
pub fn from_gemm(
    b: &Tensor,
    c: Option<&Tensor>,
    trans_b: bool,
    alpha: f32,
    beta: f32,
) -> Result<DenseLayer, String> {
    let (rows, cols, v) = matrix(b, "Gemm weight B")?;
    let (inputs, outputs, mut weights) = if trans_b {
        (cols, rows, v.to_vec())
    } else {
        (rows, cols, transpose(v, rows, cols))
    };
    if alpha != 1.0 {
        weights.iter_mut().for_each(|w| *w *= alpha);
    }
    if weights.iter().any(|w| !w.is_finite()) {
        return Err(format!("alpha = {alpha} times the weights overflows f32"));
    }
    let mut bias = match c {
        Some(c) => broadcast_row(c, outputs, "Gemm bias C")?,
        None => vec![0.0; outputs],
    };
    if beta != 1.0 {
        bias.iter_mut().for_each(|x| *x *= beta);
    }
    if bias.iter().any(|x| !x.is_finite()) {
        return Err(format!("beta = {beta} times the bias is not finite"));
    }
    Ok(DenseLayer {
        inputs,
        outputs,
        weights,
        bias,
        activation: Activation::Linear,
    })
}

/// The graph walk's handlers of these ops.
impl<'g> Walk<'g, '_> {
    pub(in super::super) fn matmul(
        &mut self,
        n: Node<'g>,
        pos: usize,
    ) -> Result<(), OnnxImportError> {
        if pos != 0 || n.inputs().len() != 2 {
            return Err(n.err("the data is not MatMul's first input; supported: MatMul(x, W) with a constant W of shape [in, out]"));
        }
        let w = constant_input(self.g, &n, 1, "weight")?;
        let layer = from_matmul(&w).map_err(|e| n.err(e))?;
        self.push_layer(&n, layer)
    }

    pub(in super::super) fn gemm(
        &mut self,
        n: Node<'g>,
        pos: usize,
    ) -> Result<(), OnnxImportError> {
        if pos != 0 {
            return Err(n.err(
                "the data is not Gemm's input A; supported: Gemm(x, B[, C]) with constant B and C",
            ));
        }
        let p = n.proto;
        let trans_a = attr::int_or(p, "transA", 0).map_err(|e| n.err(e))?;
        let trans_b = attr::int_or(p, "transB", 0).map_err(|e| n.err(e))?;
        if trans_a != 0 {
            return Err(n.err(format!("transA = {trans_a}; supported: transA = 0")));
        }
        if trans_b != 0 && trans_b != 1 {
            return Err(n.err(format!("transB = {trans_b}; supported: 0 or 1")));
        }
        let alpha = attr::float_or(p, "alpha", 1.0).map_err(|e| n.err(e))?;
        let beta = attr::float_or(p, "beta", 1.0).map_err(|e| n.err(e))?;
        if !alpha.is_finite() || !beta.is_finite() {
            return Err(n.err(format!(
                "alpha = {alpha}, beta = {beta}; supported: finite values"
            )));
        }
        let b = constant_input(self.g, &n, 1, "weight B")?;
        let c = optional_constant(self.g, &n, 2, "bias C")?;
        let layer = from_gemm(&b, c.as_ref(), trans_b == 1, alpha, beta).map_err(|e| n.err(e))?;
        self.push_layer(&n, layer)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::import::onnx::tensor::TensorData;

    fn t(dims: &[usize], v: &[f32]) -> Tensor {
        Tensor {
            name: "w".into(),
            dims: dims.to_vec(),
            data: TensorData::Float(v.to_vec()),
        }
    }

    #[test]
    fn matmul_weights_are_transposed_to_outputs_by_inputs() {
        // W = [[1, 2, 3], [4, 5, 6]] is [in=2, out=3]; output o uses column o.
        let l = from_matmul(&t(&[2, 3], &[1., 2., 3., 4., 5., 6.])).unwrap();
        assert_eq!((l.inputs, l.outputs), (2, 3));
        assert_eq!(l.weights, vec![1., 4., 2., 5., 3., 6.]);
        assert_eq!(l.bias, vec![0.; 3]);
    }

    #[test]
    fn gemm_trans_b_alpha_beta() {
        // B^T case: B is [out=2, in=3] and is already row-major [outputs][inputs].
        let b = t(&[2, 3], &[1., 2., 3., 4., 5., 6.]);
        let c = t(&[2], &[1., -1.]);
        let l = from_gemm(&b, Some(&c), true, 2.0, 0.5).unwrap();
        assert_eq!((l.inputs, l.outputs), (3, 2));
        assert_eq!(l.weights, vec![2., 4., 6., 8., 10., 12.]);
        assert_eq!(l.bias, vec![0.5, -0.5]);
        // transB = 0: B is [in=2, out=3].
        let l0 = from_gemm(&b, None, false, 1.0, 1.0).unwrap();
        assert_eq!((l0.inputs, l0.outputs), (2, 3));
        assert_eq!(l0.weights, vec![1., 4., 2., 5., 3., 6.]);
    }

    #[test]
    fn bias_shapes() {
        let mut l = from_matmul(&t(&[1, 2], &[1., 1.])).unwrap();
        add_bias(&mut l, &t(&[1, 2], &[0.5, 1.5])).unwrap();
        add_bias(&mut l, &t(&[], &[1.0])).unwrap();
        assert_eq!(l.bias, vec![1.5, 2.5]);
        let e = add_bias(&mut l, &t(&[3], &[1., 2., 3.])).unwrap_err();
        assert!(
            e.contains("shape [3]") && e.contains("supported: [2], [1, 2]"),
            "{e}"
        );
        assert!(add_bias(&mut l, &t(&[2, 2], &[1.; 4])).is_err());
    }

    #[test]
    fn bad_weight_shapes_and_values() {
        assert!(from_matmul(&t(&[4], &[1.; 4])).unwrap_err().contains("2-D"));
        assert!(from_matmul(&t(&[2, 0], &[])).is_err());
        assert!(from_matmul(&t(&[1, 2], &[1.0, f32::INFINITY]))
            .unwrap_err()
            .contains("non-finite"));
        assert!(from_gemm(&t(&[1, 1], &[f32::MAX]), None, false, 4.0, 1.0)
            .unwrap_err()
            .contains("overflows"));
    }
}
