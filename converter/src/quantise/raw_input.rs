//! Raw integer inputs quantised directly, the scaler folded into the first layer.
//!
//! A model with a saved scaler computes `z = W·((x − offset)·scale) + b`. The same function is
//! `z = W'·x + b'` with `W'[o][i] = W[o][i]·scale[i]` and `b'[o] = b[o] − Σ_i W'[o][i]·offset[i]`
//! (folding an affine map into the next, as batch normalisation is folded (Jacob et al., 2018,
//! §3.2)). When the raw features are small integers, the int8 input can then hold them exactly:
//! with a step of `2^-k` (the largest `k ≥ 0` that fits the calibration values in the 256 int8
//! levels) every integer is a whole number of steps, so the input adds no quantisation noise
//! at all, where a per-tensor int8 range over scaled features gives the narrow ones few steps.
//! The first layer's weights absorb the per-feature scale instead, per output channel.
use crate::dataset::Dataset;
use crate::graph::FloatModel;

use super::calibrate::TensorRange;

/// `model` with its scaler folded into the first layer (no scaler left); `None` when it has no
/// scaler or no layer.
pub fn fold_scaler(model: &FloatModel) -> Option<FloatModel> {
    let scaler = model.scaler.as_ref()?;
    let mut out = model.clone();
    out.scaler = None;
    let first = out.layers.first_mut()?;
    let per = |v: &[f32], i: usize, default: f32| {
        v.get(i).or_else(|| v.first()).copied().unwrap_or(default)
    };
    let inputs = first.inputs.max(1);
    for (row, b) in first.weights.chunks_exact_mut(inputs).zip(&mut first.bias) {
        let mut shift = 0f64;
        for (i, w) in row.iter_mut().enumerate() {
            let folded = f64::from(*w) * f64::from(per(&scaler.scale, i, 1.0));
            shift += folded * f64::from(per(&scaler.offset, i, 0.0));
            *w = folded as f32;
        }
        *b = (f64::from(*b) - shift) as f32;
    }
    Some(out)
}

/// The exact int8 range of raw integer features: `[0, 255·2^-k]` (zero point −128) when none is
/// negative, else `[−128·2^-k, 127·2^-k]` (zero point 0), with the largest `k` in `0..=24` that
/// holds every value. `None` when a value is not a whole number or does not fit even at `k = 0`
/// (then a step of 1 could not hold every value exactly).
pub fn exact_integer_range(data: &Dataset) -> Option<TensorRange> {
    let (mut lo, mut hi) = (0f32, 0f32);
    for &v in &data.features {
        if v.fract() != 0.0 || !v.is_finite() {
            return None;
        }
        (lo, hi) = (lo.min(v), hi.max(v));
    }
    let fits = |k: i32| {
        let s = 2f64.powi(k);
        if lo >= 0.0 {
            f64::from(hi) * s <= 255.0
        } else {
            f64::from(hi) * s <= 127.0 && f64::from(lo) * s >= -128.0
        }
    };
    let k = (0..=24).rev().find(|&k| fits(k))?;
    let step = 2f64.powi(-k);
    Some(if lo >= 0.0 {
        TensorRange {
            min: 0.0,
            max: (255.0 * step) as f32,
        }
    } else {
        TensorRange {
            min: (-128.0 * step) as f32,
            max: (127.0 * step) as f32,
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::Activation;
    use crate::graph::{DenseLayer, Scaler, ScalerKind};
    use crate::quantise::params::activation_quant;
    use kinglet_runtime::unstable::wire::format::OutputKind;

    fn data(v: Vec<f32>) -> Dataset {
        Dataset {
            rows: v.len(),
            width: 1,
            features: v,
            labels: None,
            source: "t".into(),
        }
    }

    #[test]
    fn folding_keeps_the_function() {
        let m = FloatModel {
            input_len: 2,
            scaler: Some(Scaler {
                kind: ScalerKind::Affine,
                offset: vec![1.0, -2.0],
                scale: vec![0.5, 4.0],
            }),
            layers: vec![DenseLayer {
                inputs: 2,
                outputs: 1,
                weights: vec![3.0, -1.0],
                bias: vec![0.25],
                activation: Activation::Linear,
            }],
            output: OutputKind::Logits,
            labels: vec![],
        };
        let f = fold_scaler(&m).unwrap();
        assert!(f.scaler.is_none());
        // W' = [1.5, -4], b' = 0.25 − (1.5·1 + (−4)·(−2)) = −9.25.
        assert_eq!(f.layers[0].weights, vec![1.5, -4.0]);
        assert_eq!(f.layers[0].bias, vec![-9.25]);
        // x = [3, 5]: scaled [1, 28] → 3 − 28 + 0.25 = −24.75; folded 4.5 − 20 − 9.25.
        let x = [3.0f32, 5.0];
        let z: f32 = f.layers[0]
            .weights
            .iter()
            .zip(x)
            .map(|(w, x)| w * x)
            .sum::<f32>()
            + f.layers[0].bias[0];
        assert_eq!(z, -24.75);
        assert!(fold_scaler(&f).is_none());
    }

    #[test]
    fn integer_ranges_are_exact() {
        // Digits pixels 0..=16: 16·8 = 128 ≤ 255, 16·16 > 255, so steps of 1/8.
        let r = exact_integer_range(&data((0..=16).map(|v| v as f32).collect())).unwrap();
        assert_eq!((r.min, r.max), (0.0, 31.875));
        let q = activation_quant(r.min, r.max);
        assert_eq!((q.scale, q.zero_point), (0.125, -128));
        // Bytes 0..=255: steps of 1.
        let r = exact_integer_range(&data(vec![0.0, 255.0])).unwrap();
        assert_eq!(activation_quant(r.min, r.max).scale, 1.0);
        // Signed: [-3, 5] fits 127 / 5 → steps of 1/16 (5·16 = 80, 5·32 = 160 > 127).
        let r = exact_integer_range(&data(vec![-3.0, 5.0])).unwrap();
        let q = activation_quant(r.min, r.max);
        assert_eq!((q.scale, q.zero_point), (0.0625, 0));
        assert!(exact_integer_range(&data(vec![0.5])).is_none());
        assert!(exact_integer_range(&data(vec![256.0])).is_none());
        assert!(exact_integer_range(&data(vec![-129.0])).is_none());
    }
}
