//! An f32 blob over many rows at once, each layer one matrix product (`faer`, through
//! `host::product`).
//!
//! The input scaler, bias, ReLU, softmax, sigmoid and argmax are the runtime's steps in the
//! runtime's order. The dot products are not: the runtime's kernels add each row's products in
//! input order from `+0.0` with a rounding after every multiply and add, while the matrix
//! product sums in blocks and may fuse multiply and add. Both are within the usual bound of
//! recursive summation, `|ŝ − s| ≤ γ_n · Σ_i |w_i x_i|` with `γ_n = n·u / (1 − n·u)` and
//! `u = 2^-24` (Higham, "Accuracy and Stability of Numerical Algorithms", 2nd ed., §3.1 and
//! §4.2), so the two differ by at most `2γ_n · Σ_i |w_i x_i|` per output of a layer, plus what
//! earlier layers' differences carry forward. Where the scaler has no offsets, its scale is
//! folded into the first layer's weights ([`FloatHost::new`]): `x · (s · w)` instead of
//! `(x · s) · w`, two more roundings per product, so that layer's bound becomes
//! `(γ_n + γ_{n+2}) · Σ_i |w_i s_i x_i|`, below `2γ_{n+2} · Σ_i |w_i s_i x_i|`. For the 64-input
//! layer of a 64→32→4 model that is a relative difference below about 10^-5 of the magnitudes
//! summed; reports print SQNR to two decimals and rates to four, far coarser.
use kinglet_runtime::unstable::output::{argmax, sigmoid};
use kinglet_runtime::OutputKind;
use kinglet_runtime::{Model, Precision, RunError};

use super::input::all_finite;
use super::layers::FloatLayer;
use super::product::product;
use super::softmax::{one_vs_rest_rows, softmax_rows};

/// One f32 tensor of a batch: `rows × width` values.
#[derive(Debug, Clone, PartialEq)]
pub struct FloatTensor {
    /// Elements per row.
    pub width: usize,
    /// Row-major values.
    pub values: Vec<f32>,
}

impl FloatTensor {
    /// Row `r`.
    pub fn row(&self, r: usize) -> &[f32] {
        self.values
            .get(r * self.width..(r + 1) * self.width)
            .unwrap_or(&[])
    }
}

/// What a batch of rows gave.
#[derive(Debug, Clone, PartialEq)]
pub struct FloatBatch {
    /// Rows.
    pub rows: usize,
    /// The scaled input, then each layer's output (what `Model::infer_traced` traces).
    pub stages: Vec<FloatTensor>,
    /// `rows × output_len` scores, as `Model::infer` writes them.
    pub scores: Vec<f32>,
    /// `Model::infer`'s class per row.
    pub class: Vec<usize>,
}

/// An f32 blob read for batched evaluation.
#[derive(Debug, Clone)]
pub struct FloatHost {
    width: usize,
    /// Scaler offset and scale per feature; `None` without a scaler.
    scaler: Option<(Vec<f32>, Vec<f32>)>,
    layers: Vec<FloatLayer>,
    /// The first layer's weights with the scaler's scale folded in (`s_i · w_oi`), when the
    /// scaler's offsets are all zero: that product then reads the raw rows (see [`FloatHost::new`]).
    folded: Option<Vec<f32>>,
    output: OutputKind,
}

/// The first row of `x` (rows of `w` values) holding a value that is not finite, and the
/// runtime's error for it (the index of its first such feature).
fn first_non_finite(x: &[f32], w: usize) -> Option<(usize, RunError)> {
    x.chunks_exact(w.max(1)).enumerate().find_map(|(r, row)| {
        let i = row.iter().position(|v| !v.is_finite())?;
        Some((r, RunError::NonFiniteInput { index: i as u32 }))
    })
}

/// [`FloatHost::run`] as a [`pulp::WithSimd`] operation.
struct Run<'h> {
    host: &'h FloatHost,
    x: &'h [f32],
    rows: usize,
    keep_input: bool,
}

impl pulp::WithSimd for Run<'_> {
    type Output = Result<FloatBatch, (usize, RunError)>;
    #[inline(always)]
    fn with_simd<S: pulp::Simd>(self, _: S) -> Self::Output {
        self.host.run_vectorised(self.x, self.rows, self.keep_input)
    }
}

impl FloatHost {
    /// Reads `model`; `None` unless it is an f32 blob.
    pub fn new(model: &Model<'_>) -> Option<Self> {
        if model.precision() != Precision::F32 {
            return None;
        }
        let d = model.desc();
        let width = model.input_len();
        let expand = |b: &[u8]| -> Vec<f32> {
            let v: Vec<f32> = super::layers::words(b).map(f32::from_le_bytes).collect();
            (0..width)
                .map(|i| v.get(i).or(v.first()).copied().unwrap_or(0.0))
                .collect()
        };
        let scaler = d.scaler.map(|s| (expand(s.offset), expand(s.scale)));
        let layers: Vec<FloatLayer> = d.layers.iter().map(FloatLayer::new).collect();
        // `((x − 0) · s) · w` and `x · (s · w)` differ by at most two roundings per product,
        // `|x s w| · 2u` (u = 2^-24), which adds 2u to the relative bound of the module docs
        // (γ_n becomes at most γ_{n+2}). With a nonzero offset, folding it too would subtract
        // large, nearly equal terms (`x s w − o s w`), so the scaler is then applied as is.
        let folded = match (&scaler, layers.first()) {
            (Some((off, sc)), Some(first)) if off.iter().all(|&o| o == 0.0) => Some(
                first
                    .weights
                    .chunks(first.inputs.max(1))
                    .flat_map(|row| row.iter().zip(sc).map(|(w, s)| s * w))
                    .collect(),
            ),
            _ => None,
        };
        Some(FloatHost {
            width,
            scaler,
            layers,
            folded,
            output: d.output,
        })
    }

    /// The scaled input of one row, as the runtime's input stage computes it (what
    /// [`FloatHost::run`] keeps as its first stage), into `out`.
    pub fn scaled_row(&self, x: &[f32], out: &mut Vec<f32>) {
        out.clear();
        match &self.scaler {
            Some((off, sc)) => {
                out.extend(x.iter().zip(off).zip(sc).map(|((&v, o), s)| (v - o) * s))
            }
            None => out.extend_from_slice(x),
        }
    }

    /// Runs the `rows` rows of row-major `x` (`rows × input_len`). On error, the first failing
    /// row (0-based, within the batch) and the runtime's error for it.
    pub fn run(&self, x: &[f32], rows: usize) -> Result<FloatBatch, (usize, RunError)> {
        super::vectorised(Run {
            host: self,
            x,
            rows,
            keep_input: true,
        })
    }

    /// [`FloatHost::run`] without keeping the scaled input where the pass can do without it:
    /// with no scaler, or one without offsets (its scale is folded into the first layer's
    /// weights), the first stage's `values` are empty (its `width` is the input's), the rows
    /// are read by the first product directly and no scaled copy is written;
    /// [`FloatHost::scaled_row`] gives a row of it when asked. With offsets it is kept.
    pub fn run_lean(&self, x: &[f32], rows: usize) -> Result<FloatBatch, (usize, RunError)> {
        super::vectorised(Run {
            host: self,
            x,
            rows,
            keep_input: false,
        })
    }

    #[inline(always)]
    fn run_vectorised(
        &self,
        x: &[f32],
        rows: usize,
        keep_input: bool,
    ) -> Result<FloatBatch, (usize, RunError)> {
        let w = self.width;
        if x.len() != rows * w {
            let got = x.len().checked_div(rows).unwrap_or(0);
            return Err((
                0,
                RunError::InputLength {
                    expected: w as u32,
                    got: got as u32,
                },
            ));
        }
        let mut first_error: Option<(usize, RunError)> = None;
        // One pass over the rows scales them and notes whether any value is not finite (its
        // exponent bits all ones); only then are the refused rows searched for. A lean pass
        // that needs no scaled copy only checks.
        let lean = !keep_input && (self.folded.is_some() || self.scaler.is_none());
        let mut bad = 0u32;
        let mut note = |v: f32| bad |= u32::from(v.to_bits() & 0x7f80_0000 == 0x7f80_0000);
        let input = match &self.scaler {
            // Checked on the first product's output below: a NaN or infinite input makes every
            // output of its row NaN or infinite (IEEE 754: NaN and ∞ times any number, zero
            // included, are NaN or ∞, and stay so through every sum).
            _ if lean => Vec::new(),
            Some((off, sc)) => {
                let mut input = Vec::with_capacity(x.len());
                for row in x.chunks_exact(w.max(1)) {
                    input.extend(row.iter().zip(off).zip(sc).map(|((&v, o), s)| {
                        note(v);
                        (v - o) * s
                    }));
                }
                input
            }
            None => {
                x.iter().for_each(|&v| note(v));
                x.to_vec()
            }
        };
        if bad != 0 {
            first_error = first_non_finite(x, w);
        }
        let mut stages = Vec::with_capacity(self.layers.len() + 1);
        stages.push(FloatTensor {
            width: w,
            values: input,
        });
        for (k, layer) in self.layers.iter().enumerate() {
            let Some(prev) = stages.last() else { break };
            // The first product reads the raw rows where the scale is folded into its weights
            // or there is no scaler.
            let (a, weights) = match &self.folded {
                Some(folded) if k == 0 => (x, folded),
                None if k == 0 && self.scaler.is_none() => (x, &layer.weights),
                _ => (prev.values.as_slice(), &layer.weights),
            };
            let mut values = product(a, weights, rows, layer.inputs, layer.outputs);
            if lean && k == 0 && !all_finite(&values) {
                first_error = first_non_finite(x, w);
            }
            let relu = layer.relu;
            for row in values.chunks_exact_mut(layer.outputs.max(1)) {
                // Bias and ReLU in one loop, the ReLU as a select (the runtime's `v < 0 → 0`:
                // NaN and −0 pass) so that it vectorises; a conditional store did not.
                for (v, b) in row.iter_mut().zip(&layer.bias) {
                    let s = *v + b;
                    *v = if relu && s < 0.0 { 0.0 } else { s };
                }
                if let Some(p) = &layer.pointwise {
                    for v in row.iter_mut() {
                        *v = p.eval(*v);
                    }
                }
            }
            stages.push(FloatTensor {
                width: layer.outputs,
                values,
            });
        }
        let last = stages.last().map(|t| t.values.clone()).unwrap_or_default();
        let out_len = self.layers.last().map_or(0, |l| l.outputs);
        let mut scores = last;
        match self.output {
            OutputKind::Sigmoid => scores.iter_mut().for_each(|v| *v = sigmoid(*v)),
            OutputKind::Softmax => softmax_rows(&mut scores, out_len),
            OutputKind::OneVsRest => one_vs_rest_rows(&mut scores, out_len),
            OutputKind::Logits => {}
        }
        let mut class = Vec::with_capacity(rows);
        for (r, (s, logits)) in scores
            .chunks_exact(out_len.max(1))
            .zip(
                stages
                    .last()
                    .map_or(&[][..], |t| &t.values)
                    .chunks_exact(out_len.max(1)),
            )
            .enumerate()
        {
            if !logits.iter().all(|v| v.is_finite()) {
                // A row whose input was refused fails on its input first.
                if first_error.as_ref().is_none_or(|(e, _)| *e > r) {
                    first_error = Some((r, RunError::NonFiniteOutput));
                }
            }
            class.push(match self.output {
                OutputKind::Sigmoid => usize::from(s.first().is_some_and(|&p| p > 0.5)),
                _ => argmax(s).map_or(0, |(c, _)| c),
            });
        }
        match first_error {
            Some(e) => Err(e),
            None => Ok(FloatBatch {
                rows,
                stages,
                scores,
                class,
            }),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::graph::{Activation, DenseLayer, FloatModel, Scaler, ScalerKind};

    /// A non-finite input is refused by the lean pass as by the full one (and the runtime),
    /// also where every weight of that feature is zero, with and without a folded scale.
    #[test]
    fn lean_pass_refuses_the_same_rows() {
        for scaler in [
            None,
            Some(Scaler {
                kind: ScalerKind::Affine,
                offset: vec![0.0; 3],
                scale: vec![0.5, 0.0, 2.0],
            }),
        ] {
            let model = FloatModel {
                input_len: 3,
                scaler,
                layers: vec![DenseLayer {
                    inputs: 3,
                    outputs: 2,
                    // Feature 1 has only zero weights.
                    weights: vec![1.0, 0.0, -1.0, 0.5, 0.0, 2.0],
                    bias: vec![0.0, 0.1],
                    activation: Activation::Relu,
                }],
                output: OutputKind::Softmax,
                labels: vec![],
            };
            let blob = crate::pack::pack_f32(&model).unwrap();
            let m = Model::parse(&blob).unwrap();
            let host = FloatHost::new(&m).unwrap();
            for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
                let mut x = vec![0.25f32; 3 * 6];
                x[3 * 4 + 1] = bad;
                x[3 * 5] = bad;
                let want = m
                    .infer(
                        kinglet_runtime::Input::F32(&x[12..15]),
                        &mut vec![0u8; m.scratch_bytes()],
                        &mut [0.0; 2],
                    )
                    .unwrap_err();
                let full = host.run(&x, 6).unwrap_err();
                assert_eq!(full, (4, want));
                assert_eq!(host.run_lean(&x, 6).unwrap_err(), full, "{bad}");
            }
        }
    }
}
