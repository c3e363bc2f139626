//! Folding an inference-mode `BatchNormalization` that follows a dense layer into the layer:
//! `BN(y) = (y - mean) * k + beta` with `k = gamma / sqrt(var + eps)`, so for `y = W x + b`
//! each output row scales: `w' = w * k`, `b' = (b - mean) * k + beta` (the batch-normalisation
//! inference transform of Ioffe & Szegedy, 2015, with the running statistics).

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::{Stage, Walk};
use super::{constant_input, finite};
use crate::graph::DenseLayer;

/// The per-channel parameters of a `BatchNormalization` node.
#[derive(Debug, Clone, Copy)]
pub struct BatchNorm<'a> {
    /// `scale` (gamma).
    pub gamma: &'a [f32],
    /// `B` (beta).
    pub beta: &'a [f32],
    /// `input_mean` (running mean).
    pub mean: &'a [f32],
    /// `input_var` (running variance).
    pub var: &'a [f32],
    /// `epsilon`.
    pub eps: f32,
}

/// Folds `bn` into `layer` (computed in f64, stored as f32).
pub fn fold(layer: &mut DenseLayer, bn: BatchNorm<'_>) -> Result<(), String> {
    let n = layer.outputs;
    for (what, v) in [
        ("scale", bn.gamma),
        ("B", bn.beta),
        ("input_mean", bn.mean),
        ("input_var", bn.var),
    ] {
        if v.len() != n {
            return Err(format!(
                "{what} has {} values but the dense layer before it has {n} outputs; supported: one value per output channel",
                v.len()
            ));
        }
    }
    let mut k = Vec::with_capacity(n);
    for o in 0..n {
        let (Some(&g), Some(&var)) = (bn.gamma.get(o), bn.var.get(o)) else {
            continue;
        };
        let d = f64::from(var) + f64::from(bn.eps);
        if d.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return Err(format!(
                "input_var + epsilon = {d} for channel {o}; it must be positive"
            ));
        }
        k.push(f64::from(g) / d.sqrt());
    }
    let inputs = layer.inputs;
    for (o, row) in layer.weights.chunks_mut(inputs.max(1)).enumerate().take(n) {
        let ko = k.get(o).copied().unwrap_or(1.0);
        row.iter_mut()
            .for_each(|w| *w = (f64::from(*w) * ko) as f32);
    }
    for (o, b) in layer.bias.iter_mut().enumerate() {
        let (Some(&ko), Some(&m), Some(&be)) = (k.get(o), bn.mean.get(o), bn.beta.get(o)) else {
            continue;
        };
        *b = ((f64::from(*b) - f64::from(m)) * ko + f64::from(be)) as f32;
    }
    if layer
        .weights
        .iter()
        .chain(&layer.bias)
        .any(|v| !v.is_finite())
    {
        return Err("folding gives a non-finite weight or bias".into());
    }
    Ok(())
}

/// The graph walk's handler of these ops.
impl<'g> Walk<'g, '_> {
    pub(in super::super) fn batchnorm(
        &mut self,
        n: Node<'g>,
        pos: usize,
    ) -> Result<(), OnnxImportError> {
        if self.stage != Stage::Open || pos != 0 {
            return Err(n.err(format!(
                "BatchNormalization {}; supported: right after a dense layer, before its activation (folded into it)",
                self.stage_text()
            )));
        }
        let training = attr::int_or(n.proto, "training_mode", 0).map_err(|e| n.err(e))?;
        if training != 0 {
            return Err(n.err("training_mode = 1; supported: inference mode (0)"));
        }
        let eps = attr::float_or(n.proto, "epsilon", 1e-5).map_err(|e| n.err(e))?;
        let params = [
            constant_input(self.g, &n, 1, "scale")?,
            constant_input(self.g, &n, 2, "B")?,
            constant_input(self.g, &n, 3, "input_mean")?,
            constant_input(self.g, &n, 4, "input_var")?,
        ];
        let [gamma, beta, mean, var] = [
            finite(&n, &params[0], "scale")?,
            finite(&n, &params[1], "B")?,
            finite(&n, &params[2], "input_mean")?,
            finite(&n, &params[3], "input_var")?,
        ];
        let layer = self
            .layers
            .last_mut()
            .ok_or_else(|| n.err("internal: no open layer"))?;
        fold(
            layer,
            BatchNorm {
                gamma,
                beta,
                mean,
                var,
                eps,
            },
        )
        .map_err(|e| n.err(e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::Activation;

    #[test]
    fn hand_worked_fold() {
        // W = [[1, 2], [3, 4]], b = [0.5, -1].
        // Channel 0: gamma 6, var 3, eps 1 -> k = 6 / sqrt(4) = 3; mean 1, beta 0.1:
        //   w' = [3, 6], b' = (0.5 - 1) * 3 + 0.1 = -1.4.
        // Channel 1: gamma 2, var 15, eps 1 -> k = 2 / sqrt(16) = 0.5; mean 2, beta 0.25:
        //   w' = [1.5, 2], b' = (-1 - 2) * 0.5 + 0.25 = -1.25.
        let mut l = DenseLayer {
            inputs: 2,
            outputs: 2,
            weights: vec![1., 2., 3., 4.],
            bias: vec![0.5, -1.0],
            activation: Activation::Linear,
        };
        let bn = BatchNorm {
            gamma: &[6., 2.],
            beta: &[0.1, 0.25],
            mean: &[1., 2.],
            var: &[3., 15.],
            eps: 1.0,
        };
        fold(&mut l, bn).unwrap();
        assert_eq!(l.weights, vec![3., 6., 1.5, 2.]);
        assert!((l.bias[0] - (-1.4)).abs() < 1e-6, "{:?}", l.bias);
        assert_eq!(l.bias[1], -1.25);
    }

    #[test]
    fn folded_layer_equals_layer_then_bn() {
        let mut l = DenseLayer {
            inputs: 3,
            outputs: 2,
            weights: vec![0.2, -0.4, 1.0, 0.7, 0.1, -0.3],
            bias: vec![0.05, -0.2],
            activation: Activation::Linear,
        };
        let orig = l.clone();
        let bn = BatchNorm {
            gamma: &[1.3, 0.8],
            beta: &[-0.1, 0.4],
            mean: &[0.2, -0.5],
            var: &[0.9, 2.5],
            eps: 1e-5,
        };
        fold(&mut l, bn).unwrap();
        let x = [0.3f64, -1.2, 2.0];
        for o in 0..2 {
            let y: f64 = (0..3)
                .map(|i| f64::from(orig.weights[o * 3 + i]) * x[i])
                .sum::<f64>()
                + f64::from(orig.bias[o]);
            let want = (y - f64::from(bn.mean[o])) * f64::from(bn.gamma[o])
                / (f64::from(bn.var[o]) + 1e-5f32 as f64).sqrt()
                + f64::from(bn.beta[o]);
            let got: f64 = (0..3)
                .map(|i| f64::from(l.weights[o * 3 + i]) * x[i])
                .sum::<f64>()
                + f64::from(l.bias[o]);
            assert!((got - want).abs() < 1e-6, "{got} vs {want}");
        }
    }

    #[test]
    fn wrong_lengths_and_non_positive_variance() {
        let mut l = DenseLayer {
            inputs: 1,
            outputs: 2,
            weights: vec![1., 1.],
            bias: vec![0., 0.],
            activation: Activation::Linear,
        };
        let short = BatchNorm {
            gamma: &[1.],
            beta: &[0., 0.],
            mean: &[0., 0.],
            var: &[1., 1.],
            eps: 1e-5,
        };
        assert!(fold(&mut l, short)
            .unwrap_err()
            .contains("scale has 1 values"));
        let neg = BatchNorm {
            gamma: &[1., 1.],
            beta: &[0., 0.],
            mean: &[0., 0.],
            var: &[1., -1.],
            eps: 0.0,
        };
        assert!(fold(&mut l, neg).unwrap_err().contains("channel 1"));
    }
}
