//! Whether a calibrated input range is one the float model can have been trained on, judged by
//! the model's own first-layer biases.
//!
//! Our bound (no source): the first layer computes `z = w·x + b` in f32. When `|w·x|` is over
//! `2^24 · |b|`, the bias is smaller than one f32 step (ulp) of `w·x` — f32 has a 24-bit
//! significand — so the float model itself computes `z` as if the bias were not there. If that
//! holds for every first-layer unit that has a bias, the model's biases play no part on that
//! input; a model trained on such inputs could not have given them any use, yet they are not
//! zero. So an input range that lets such a row through (after clamping the row to the range,
//! which is what the int8 input does) is taken to be beyond anything the model has seen: a row
//! of `3e38`, or integers near `2^63` in a `.npy` file, or features in the wrong units. Ordinary
//! rows are six orders of magnitude inside the bound (on the bundled examples' rows the largest
//! `min over units |w·x| / |b|` is below 6), and a first layer without biases is not judged.
use super::calibrate::TensorRange;
use crate::graph::DenseLayer;

/// How many times a unit's input term must exceed its bias for f32 to lose the bias: `2^24`.
pub const BIAS_LOST: f64 = 16_777_216.0;

/// Rows on which the float model loses every first-layer bias.
#[derive(Debug, Clone, PartialEq)]
pub struct BiasesLost {
    /// The first such row (0-based).
    pub row: usize,
    /// How many rows there are.
    pub rows: usize,
    /// On the first row, the smallest `|w·x|` over the units that have a bias.
    pub smallest_term: f64,
    /// The largest `|b|` of the first layer.
    pub largest_bias: f64,
}

/// The rows of `scaled` (row-major, `layer.inputs` wide), each clamped to `range`, on which every
/// unit of `layer` with a non-zero bias has `|w·x| > 2^24 · |b|`; `None` when there is none (or
/// no unit has a bias).
pub fn biases_lost(layer: &DenseLayer, scaled: &[f32], range: TensorRange) -> Option<BiasesLost> {
    let mut scan = BiasScan::new(layer, range)?;
    for x in scaled.chunks_exact(layer.inputs.max(1)) {
        scan.add_row(x);
    }
    scan.finish()
}

/// [`biases_lost`] a row at a time, in row order.
#[derive(Debug, Clone)]
pub struct BiasScan<'a> {
    units: Vec<(&'a [f32], f64)>,
    largest_bias: f64,
    range: TensorRange,
    row: usize,
    found: Option<BiasesLost>,
}

impl<'a> BiasScan<'a> {
    /// The scan of `layer`'s inputs clamped to `range`; `None` when no unit has a bias.
    pub fn new(layer: &'a DenseLayer, range: TensorRange) -> Option<Self> {
        let width = layer.inputs.max(1);
        let units: Vec<(&[f32], f64)> = layer
            .weights
            .chunks_exact(width)
            .zip(&layer.bias)
            .filter(|(_, &b)| b != 0.0)
            .map(|(w, &b)| (w, f64::from(b).abs()))
            .collect();
        let largest_bias = units.iter().map(|u| u.1).fold(0.0, f64::max);
        if units.is_empty() {
            return None;
        }
        Some(BiasScan {
            units,
            largest_bias,
            range,
            row: 0,
            found: None,
        })
    }

    /// The next row of the layer's (scaled) input.
    pub fn add_row(&mut self, x: &[f32]) {
        let range = self.range;
        let mut smallest = f64::INFINITY;
        let lost = self.units.iter().all(|(w, b)| {
            let z: f64 = w
                .iter()
                .zip(x)
                .map(|(&w, &x)| f64::from(w) * f64::from(x.clamp(range.min, range.max)))
                .sum();
            smallest = smallest.min(z.abs());
            z.abs() > BIAS_LOST * b
        });
        if lost {
            match &mut self.found {
                Some(f) => f.rows += 1,
                None => {
                    self.found = Some(BiasesLost {
                        row: self.row,
                        rows: 1,
                        smallest_term: smallest,
                        largest_bias: self.largest_bias,
                    })
                }
            }
        }
        self.row += 1;
    }

    /// The rows found.
    pub fn finish(self) -> Option<BiasesLost> {
        self.found
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::Activation;

    fn layer(bias: [f32; 2]) -> DenseLayer {
        DenseLayer {
            inputs: 2,
            outputs: 2,
            weights: vec![1.0, 2.0, -1.0, 0.5],
            bias: bias.to_vec(),
            activation: Activation::Relu,
        }
    }

    const WIDE: TensorRange = TensorRange {
        min: -f32::MAX,
        max: f32::MAX,
    };

    #[test]
    fn a_row_that_drowns_every_bias_is_found() {
        // Row 1: w·x = (3e8, -5e7) against biases (1, -2): both over 2^24 · |b| (3.4e7 for -2).
        let rows = [1.0f32, 2.0, 1e8, 1e8, 0.5, 0.5];
        let f = biases_lost(&layer([1.0, -2.0]), &rows, WIDE).unwrap();
        assert_eq!((f.row, f.rows), (1, 1));
        assert_eq!(f.smallest_term, 5e7);
        assert_eq!(f.largest_bias, 2.0);
    }

    #[test]
    fn one_unit_that_keeps_its_bias_is_enough() {
        // Unit 0: w·x = 2e7 + 2e7 = 4e7 > 2^24; unit 1: -2e7 + 5e6 = -1.5e7, under 2^24 · 1.
        let rows = [2e7f32, 1e7];
        assert_eq!(biases_lost(&layer([1.0, 1.0]), &rows, WIDE), None);
        // At the bound itself the bias is kept: |w·x| = 2^24 exactly.
        let rows = [BIAS_LOST as f32, 0.0];
        let l = DenseLayer {
            inputs: 2,
            outputs: 1,
            weights: vec![1.0, 0.0],
            bias: vec![1.0],
            activation: Activation::Linear,
        };
        assert_eq!(biases_lost(&l, &rows, WIDE), None);
        let rows = [2.0 * BIAS_LOST as f32, 0.0];
        assert!(biases_lost(&l, &rows, WIDE).is_some());
    }

    #[test]
    fn the_range_clamps_the_row_first() {
        let rows = [1e30f32, 1e30];
        assert!(biases_lost(&layer([1.0, 1.0]), &rows, WIDE).is_some());
        let narrow = TensorRange {
            min: -10.0,
            max: 10.0,
        };
        assert_eq!(biases_lost(&layer([1.0, 1.0]), &rows, narrow), None);
    }

    #[test]
    fn a_first_layer_without_biases_is_not_judged() {
        let rows = [1e30f32, 1e30];
        assert_eq!(biases_lost(&layer([0.0, 0.0]), &rows, WIDE), None);
        // A unit without a bias is left out; the one with a bias decides.
        assert!(biases_lost(&layer([0.0, 1.0]), &rows, WIDE).is_some());
    }
}
