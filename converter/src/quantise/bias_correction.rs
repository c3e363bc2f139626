//! Bias correction (Nagel et al., 2019, "Data-Free Quantization Through Weight Equalization and
//! Bias Correction", §4.2, the empirical form on calibration rows).
//!
//! Rounding a layer's weights to int8 moves its output on average: with `W_q` the dequantised
//! int8 weights, the expected output error is `E[W_q x] − E[W x] = (W_q − W) E[x]`, where `x` is
//! the layer's input. Adding `(W − W_q) E[x]` to the bias cancels it. `E[x]` is the mean, over the
//! calibration rows, of the layer's input in the float model (the scaled input for the first
//! layer, the previous layer's float output after its activation otherwise), and `W_q` is
//! exactly what the pack writes ([`super::params::weight_scale`], [`super::params::quantise_weight`]).
//! Each layer is corrected against the float model's own inputs, independently of the others.
use anyhow::{bail, Result};

use super::params::{quantise_weight_bits, weight_scale_bits};
use super::weight_bits::{LayerBits, WeightBits};
use crate::graph::{DenseLayer, FloatModel};

/// The biases of `layer` after correction for its int8 weight rounding, given the mean of each
/// of its inputs (in f64).
pub fn corrected_bias(layer: &DenseLayer, input_mean: &[f64]) -> Vec<f64> {
    corrected_bias_bits(layer, input_mean, WeightBits::Int8)
}

/// [`corrected_bias`] for weights quantised to `bits` (int4: `FORMAT.md` §3.5).
pub fn corrected_bias_bits(layer: &DenseLayer, input_mean: &[f64], bits: WeightBits) -> Vec<f64> {
    layer
        .weights
        .chunks_exact(layer.inputs.max(1))
        .zip(&layer.bias)
        .map(|(row, &b)| {
            let s = weight_scale_bits(row, bits);
            let shift: f64 = row
                .iter()
                .zip(input_mean)
                .map(|(&w, &m)| {
                    let wq = f64::from(quantise_weight_bits(w, s, bits)) * f64::from(s);
                    (f64::from(w) - wq) * m
                })
                .sum();
            f64::from(b) + shift
        })
        .collect()
}

/// `model` with every layer's bias corrected; `means[k]` is the mean of layer `k`'s input (the
/// calibration's tensor `k`).
pub fn bias_corrected(model: &FloatModel, means: &[Vec<f64>]) -> Result<FloatModel> {
    bias_corrected_bits(model, means, LayerBits::default())
}

/// [`bias_corrected`] with layer `k`'s weights quantised to `bits.get(k)`.
pub fn bias_corrected_bits(
    model: &FloatModel,
    means: &[Vec<f64>],
    bits: LayerBits,
) -> Result<FloatModel> {
    let mut out = model.clone();
    for (k, layer) in out.layers.iter_mut().enumerate() {
        let Some(mean) = means.get(k).filter(|m| m.len() == layer.inputs) else {
            bail!("internal: no input means of layer {k} for bias correction");
        };
        layer.bias = corrected_bias_bits(layer, mean, bits.get(k))
            .into_iter()
            .map(|b| b as f32)
            .collect();
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::Activation;

    #[test]
    fn hand_worked_correction() {
        // One row [127, 0.25]: scale 1, int8 [127, 0], so W − W_q = [0, 0.25]; with
        // E[x] = [3, 2] the bias moves by 0.25 · 2 = 0.5.
        let l = DenseLayer {
            inputs: 2,
            outputs: 1,
            weights: vec![127.0, 0.25],
            bias: vec![0.5],
            activation: Activation::Linear,
        };
        let b = corrected_bias(&l, &[3.0, 2.0]);
        assert_eq!(b, vec![1.0]);
        // Inputs of mean zero need no correction.
        assert_eq!(corrected_bias(&l, &[0.0, 0.0]), vec![0.5]);
    }
}
