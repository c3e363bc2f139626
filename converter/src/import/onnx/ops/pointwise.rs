//! Pointwise activations between (or after) dense layers other than `Relu`: `Tanh`, `Sigmoid`
//! (when a dense layer reads it; on the last layer it is the output function, `activation.rs`),
//! `LeakyRelu`, `Clip`, `HardSigmoid`, `HardSwish`, `Elu`, `Selu`, `Softplus` and `Gelu`
//! (opset 20, `approximate` `none` or `tanh`). Each becomes the layer's activation with the
//! attributes and defaults of the ONNX operator definitions (onnx/docs/Operators.md); any
//! other attribute value is refused, never approximated. The decomposed `Gelu` an exporter
//! writes for older opsets is matched in `gelu_pattern.rs`.

use crate::graph::{Activation, Pointwise, PointwiseKind};

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::graph_index::GraphIndex;
use super::super::node::{Domain, Node};
use super::super::normalise::{Stage, Walk};
use super::{finite, optional_constant};

/// Whether the value `v` is read (through ops that keep values as they are) by a dense layer:
/// then a `Sigmoid` on it is a hidden activation, not the output function.
pub fn feeds_dense(g: &GraphIndex<'_>, v: &str) -> bool {
    let mut current = v.to_string();
    for _ in 0..=g.nodes.len() {
        let next: Vec<Node<'_>> = g
            .consumers(&current)
            .iter()
            .filter_map(|&i| g.node(i))
            .filter(|n| !super::labels::is_argmax(n))
            .collect();
        let [n] = next.as_slice() else {
            return false;
        };
        match (n.domain(), n.op()) {
            (Domain::Onnx, "MatMul" | "Gemm") => return true,
            (Domain::Onnx, "Identity" | "Dropout" | "Cast" | "Flatten" | "Reshape") => {
                match n.outputs().first() {
                    Some(o) => current = o.clone(),
                    None => return false,
                }
            }
            _ => return false,
        }
    }
    false
}

/// The graph walk's handlers of these ops.
impl<'g> Walk<'g, '_> {
    /// Sets `act` as the activation of the layer just read.
    pub(in super::super) fn set_pointwise(
        &mut self,
        n: &Node<'g>,
        act: Pointwise,
    ) -> Result<(), OnnxImportError> {
        match (self.stage, self.layers.last_mut()) {
            (Stage::Open, Some(l)) => {
                l.activation = Activation::Pointwise(act);
                self.stage = Stage::Closed;
                Ok(())
            }
            _ => Err(n.err(format!(
                "{} {}; supported: {} right after a dense layer (its activation), one activation per layer",
                n.op(),
                self.stage_text(),
                n.op()
            ))),
        }
    }

    /// `Tanh`, `LeakyRelu`, `Clip`, `HardSigmoid`, `HardSwish`, `Elu`, `Selu`, `Softplus`,
    /// `Gelu`, and a `Sigmoid` a dense layer reads.
    pub(in super::super) fn pointwise(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        let p = self.pointwise_of(&n)?;
        self.set_pointwise(&n, p)
    }

    fn pointwise_of(&self, n: &Node<'g>) -> Result<Pointwise, OnnxImportError> {
        let e = |m: String| n.err(m);
        let float = |name: &str, default: f32| -> Result<f32, OnnxImportError> {
            let v = attr::float_or(n.proto, name, default).map_err(e)?;
            if v.is_finite() {
                Ok(v)
            } else {
                Err(n.err(format!(
                    "attribute {name} is {v}; supported: a finite value"
                )))
            }
        };
        let of = |kind, a: f32, b: f32| Pointwise {
            kind,
            params: [a, b],
        };
        Ok(match n.op() {
            "Tanh" => of(PointwiseKind::Tanh, 0.0, 0.0),
            "Sigmoid" => of(PointwiseKind::Sigmoid, 0.0, 0.0),
            "Softplus" => of(PointwiseKind::Softplus, 0.0, 0.0),
            "HardSwish" => of(PointwiseKind::HardSwish, 0.0, 0.0),
            "LeakyRelu" => of(PointwiseKind::LeakyRelu, float("alpha", 0.01)?, 0.0),
            "Elu" => of(PointwiseKind::Elu, float("alpha", 1.0)?, 0.0),
            "HardSigmoid" => of(
                PointwiseKind::HardSigmoid,
                float("alpha", 0.2)?,
                float("beta", 0.5)?,
            ),
            // Defaults of the ONNX definition (Selu-6), as f32.
            "Selu" => of(
                PointwiseKind::Selu,
                float("alpha", 1.673_263_2)?,
                float("gamma", 1.050_701)?,
            ),
            "Clip" => {
                let (lo, hi) = self.clip_bounds(n)?;
                if lo > hi {
                    return Err(n.err(format!("min {lo} is above max {hi}; supported: min ≤ max")));
                }
                of(PointwiseKind::Clip, lo, hi)
            }
            "Gelu" => {
                let approx = attr::strings(n.proto, "approximate")
                    .map_err(e)?
                    .and_then(|v| v.into_iter().next())
                    .unwrap_or_else(|| "none".into());
                match approx.as_str() {
                    "none" => of(PointwiseKind::Gelu, 0.0, 0.0),
                    "tanh" => of(PointwiseKind::GeluTanh, 0.0, 0.0),
                    other => {
                        return Err(n.err(format!(
                            "approximate = {other:?}; supported: \"none\" or \"tanh\""
                        )))
                    }
                }
            }
            other => return Err(n.err(format!("internal: {other} is not a pointwise op"))),
        })
    }

    /// `Clip`'s bounds: attributes `min`/`max` before opset 11, constant inputs 1 and 2 from
    /// 11 on; an absent bound is the f32 extreme (the operator's default: no bound).
    fn clip_bounds(&self, n: &Node<'g>) -> Result<(f32, f32), OnnxImportError> {
        let bound = |i: usize, role: &str, attr_name: &str, default: f32| {
            if let Some(t) = optional_constant(self.g, n, i, role)? {
                let v = finite(n, &t, role)?;
                return match v {
                    [x] => Ok(*x),
                    _ => Err(n.err(format!(
                        "{role} has {} values; supported: one (a scalar)",
                        v.len()
                    ))),
                };
            }
            let v = attr::float_or(n.proto, attr_name, default).map_err(|e| n.err(e))?;
            if v.is_nan() {
                return Err(n.err(format!("attribute {attr_name} is NaN")));
            }
            Ok(v.clamp(f32::MIN, f32::MAX))
        };
        Ok((
            bound(1, "min", "min", f32::MIN)?,
            bound(2, "max", "max", f32::MAX)?,
        ))
    }
}
