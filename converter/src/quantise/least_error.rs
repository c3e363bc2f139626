//! The `least-error` range method: per tensor, the clipping range whose int8 quantisation of the
//! calibration values has the smallest mean squared error, found by a grid search over clipping
//! thresholds (Nagel et al., 2021, "A White Paper on Neural Network Quantization", §3.4, MSE range
//! setting; Banner et al., 2019, "Post training 4-bit quantization of convolutional networks for
//! rapid-deployment", choose the clipping value that minimises the same error analytically).
//!
//! The grid: with `lo = min(v_min, 0)` and `hi = max(v_max, 0)` (the min/max range widened to 0,
//! as the quantiser widens every range), the candidates are `[α·lo, α·hi]` for
//! `α = i / GRID_STEPS`, `i = 1..=GRID_STEPS`; both ends shrink by the same factor, so the zero
//! point stays where min/max puts it (one search per tensor, not one per end). Each candidate is
//! quantised exactly as the pack quantises ([`super::params::activation_quant`], the runtime's
//! [`quantize_linear`]) and its error is `mean((v − dequant(quant(v)))²)` over all the tensor's
//! values, summed in f64. The first `α` with the smallest error wins (`α = 1` is min/max, so the
//! method never does worse than min/max on the calibration values).
use kinglet_runtime::unstable::scale::quantize_linear;

use super::calibrate::TensorRange;
use super::params::activation_quant;

/// Candidates of the grid (`α` from `1 / GRID_STEPS` to 1 in steps of `1 / GRID_STEPS`).
pub const GRID_STEPS: usize = 100;

/// What the grid search chose for one tensor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LeastError {
    /// The chosen `i` (`α = i / GRID_STEPS`).
    pub step: usize,
    /// The chosen range.
    pub range: TensorRange,
    /// Its mean squared error on the values.
    pub mse: f64,
    /// The min/max range's (`α = 1`).
    pub mse_minmax: f64,
}

/// The mean squared error of quantising `values` to int8 over `range`, as the pack would.
pub fn quantisation_mse(values: &[f32], range: TensorRange) -> f64 {
    if values.is_empty() {
        return 0.0;
    }
    let q = activation_quant(range.min, range.max);
    let sum: f64 = values
        .iter()
        .map(|&v| {
            let x = quantize_linear(v, q.scale, q.zero_point);
            let back = (f32::from(x) - f32::from(q.zero_point)) * q.scale;
            let d = f64::from(v) - f64::from(back);
            d * d
        })
        .sum();
    sum / values.len() as f64
}

/// The grid search over `values` (any order; an empty tensor gets `[0, 0]`).
pub fn least_error(values: &[f32]) -> LeastError {
    let (lo, hi) = values
        .iter()
        .fold((0.0f32, 0.0f32), |(a, b), &v| (a.min(v), b.max(v)));
    let candidate = |i: usize| {
        let alpha = i as f64 / GRID_STEPS as f64;
        TensorRange {
            min: (alpha * f64::from(lo)) as f32,
            max: (alpha * f64::from(hi)) as f32,
        }
    };
    let mut best = LeastError {
        step: GRID_STEPS,
        range: candidate(GRID_STEPS),
        mse: f64::INFINITY,
        mse_minmax: quantisation_mse(values, candidate(GRID_STEPS)),
    };
    for i in 1..=GRID_STEPS {
        let range = candidate(i);
        let mse = if i == GRID_STEPS {
            best.mse_minmax
        } else {
            quantisation_mse(values, range)
        };
        if mse < best.mse {
            best = LeastError {
                step: i,
                range,
                mse,
                ..best
            };
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_long_tail_is_clipped_and_a_plain_set_is_not() {
        // 0..=99 evenly: min/max steps of 99/255 ≈ 0.39 give a rounding error of about
        // 0.39²/12; clipping would cost far more, so the whole range stays.
        let even: Vec<f32> = (0..100).map(|i| i as f32).collect();
        let e = least_error(&even);
        assert_eq!(e.step, GRID_STEPS);
        assert_eq!(e.mse, e.mse_minmax);
        // An exponential tail (the quantiles -ln(1 - (i + 0.5) / n), largest ≈ 9.9): the few
        // values past a few means cost less clipped than the wide steps cost everyone.
        let n = 10_000;
        let tail: Vec<f32> = (0..n)
            .map(|i| -(1.0 - (i as f64 + 0.5) / n as f64).ln() as f32)
            .collect();
        let e = least_error(&tail);
        assert!(e.step < GRID_STEPS, "{e:?}");
        assert!(e.mse < e.mse_minmax, "{e:?}");
        // No candidate of the grid does better (recomputed one by one).
        let hi = tail.iter().copied().fold(0.0f32, f32::max);
        for i in 1..=GRID_STEPS {
            let r = TensorRange {
                min: 0.0,
                max: (i as f64 / GRID_STEPS as f64 * f64::from(hi)) as f32,
            };
            assert!(quantisation_mse(&tail, r) >= e.mse, "step {i}");
        }
    }

    #[test]
    fn degenerate_tensors() {
        let e = least_error(&[]);
        assert_eq!((e.range.min, e.range.max, e.mse), (0.0, 0.0, 0.0));
        // All zeros: every candidate is exact; the first (smallest) wins.
        let e = least_error(&[0.0; 8]);
        assert_eq!((e.step, e.mse), (1, 0.0));
    }
}
