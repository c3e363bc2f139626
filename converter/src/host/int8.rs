//! An int8 blob over many rows at once, with the runtime's results bit for bit.
//!
//! Each layer's dot products `Σ_i w_oi · x_i` (int8 weights and inputs) are computed as one
//! matrix product in floating point. That is exact, whatever order the product sums in and
//! whether it fuses multiply and add: every product `w · x` is an integer of at most 2^14 in
//! magnitude, and every partial sum an integer of at most `Σ_i |w_oi| · 128` (the layer's
//! [`Int8Layer::dot_bound`]); a binary floating-point format holds every integer up to 2^24
//! (f32) or 2^53 (f64) exactly, so while the bound stays within that, no step rounds (IEEE 754:
//! an exactly representable result is returned exactly). A layer whose bound exceeds 2^24 is
//! multiplied in f64; [`kinglet_runtime::Model::parse`] has proved its sums fit in i32, far
//! below 2^53. The exact integer is then added to the bias and requantised by the runtime's own
//! [`requantise_validated`], so every output byte is the runtime's.
//!
//! We use a matrix-multiplication crate (`matrixmultiply`, through `ndarray`) rather than a
//! hand-written i8 × i8 → i32 loop: it is cache-blocked and vectorised for the host at run time
//! (AVX2 and FMA where present), which plain safe Rust compiled for the baseline x86-64 target
//! is not.
use kinglet_runtime::unstable::output::{argmax, argmax_i8, sigmoid, softmax};
use kinglet_runtime::unstable::requant::requantise_validated;
use kinglet_runtime::unstable::scale::{quantise_integer, quantize_linear};
use kinglet_runtime::OutputKind;
use kinglet_runtime::{Input, Model, Precision, RunError};
use ndarray::linalg::general_mat_mul;
use ndarray::{Array2, ArrayView2};

use super::layers::{words, Int8Layer};

/// Largest dot-product bound an f32 product keeps exact: 2^24.
const F32_EXACT: u64 = 1 << 24;

/// One int8 tensor of a batch: `rows × width` values, with its quantisation.
#[derive(Debug, Clone, PartialEq)]
pub struct Int8Tensor {
    /// Elements per row.
    pub width: usize,
    /// Row-major values.
    pub values: Vec<i8>,
    /// Scale.
    pub scale: f32,
    /// Zero point.
    pub zero_point: i8,
}

impl Int8Tensor {
    /// Element `i` of row `r` as a real number, as the runtime's `Activations::real`:
    /// `(q − zero_point) · scale`.
    pub fn real(&self, r: usize, i: usize) -> f32 {
        let q = self.values.get(r * self.width + i).copied().unwrap_or(0);
        (f32::from(q) - f32::from(self.zero_point)) * self.scale
    }

    /// Row `r`.
    pub fn row(&self, r: usize) -> &[i8] {
        self.values
            .get(r * self.width..(r + 1) * self.width)
            .unwrap_or(&[])
    }
}

/// What a batch of rows gave.
#[derive(Debug, Clone, PartialEq)]
pub struct Int8Batch {
    /// Rows.
    pub rows: usize,
    /// The quantised input, then each layer's output (what `Model::infer_traced` traces).
    pub stages: Vec<Int8Tensor>,
    /// `rows × output_len` scores, as `Model::infer` writes them.
    pub scores: Vec<f32>,
    /// `Model::infer`'s class per row.
    pub infer_class: Vec<usize>,
    /// `Model::classify`'s class per row.
    pub classify_class: Vec<usize>,
}

/// The per-feature input quantisation of an int8 blob.
#[derive(Debug, Clone)]
struct InputQuant {
    /// Scaler offset and scale per feature (`0` and `1` without a scaler).
    offset: Vec<f32>,
    scale: Vec<f32>,
    quant_scale: f32,
    zero_point: i8,
    /// Integer paths: multiplier, addend, shift per feature.
    integer: Vec<(i32, i64, u8)>,
}

/// An int8 blob read for batched evaluation.
#[derive(Debug, Clone)]
pub struct Int8Host {
    width: usize,
    input: InputQuant,
    layers: Vec<Int8Layer>,
    output: OutputKind,
}

/// Per-feature values of a length-1 (uniform) or per-feature tensor of f32s.
fn per_feature(bytes: Option<&[u8]>, width: usize, default: f32) -> Vec<f32> {
    let v: Vec<f32> = bytes
        .map(|b| words(b).map(f32::from_le_bytes).collect())
        .unwrap_or_default();
    (0..width)
        .map(|i| v.get(i).or(v.first()).copied().unwrap_or(default))
        .collect()
}

impl Int8Host {
    /// Reads `model`; `None` unless it is an int8 blob.
    pub fn new(model: &Model<'_>) -> Option<Self> {
        if model.precision() != Precision::Int8 {
            return None;
        }
        let d = model.desc();
        let q = d.input_quant.as_ref()?;
        let width = model.input_len();
        let mult: Vec<i32> = words(q.int_mult).map(i32::from_le_bytes).collect();
        let add: Vec<i64> = q
            .int_add
            .as_chunks::<8>()
            .0
            .iter()
            .map(|b| i64::from_le_bytes(*b))
            .collect();
        // Empty when the blob leaves the integer input path out.
        let integer = (0..width)
            .take_while(|_| !q.int_shift.is_empty())
            .map(|i| {
                let j = if q.int_shift.len() == 1 { 0 } else { i };
                (
                    mult.get(j).copied().unwrap_or(0),
                    add.get(j).copied().unwrap_or(0),
                    q.int_shift.get(j).copied().unwrap_or(0),
                )
            })
            .collect();
        let layers = d
            .layers
            .iter()
            .map(Int8Layer::new)
            .collect::<Option<Vec<_>>>()?;
        Some(Int8Host {
            width,
            input: InputQuant {
                offset: per_feature(d.scaler.map(|s| s.offset), width, 0.0),
                scale: per_feature(d.scaler.map(|s| s.scale), width, 1.0),
                quant_scale: q.scale,
                zero_point: q.zero_point,
                integer,
            },
            layers,
            output: d.output,
        })
    }

    /// Quantises one row into `dst`, as the runtime's input stage.
    fn load_row(&self, input: Input<'_>, dst: &mut [i8]) -> Result<(), RunError> {
        let q = &self.input;
        match input {
            Input::F32(v) => {
                // Refused rows first, so that the loop below has no early exit and vectorises.
                if let Some(i) = v.iter().position(|x| !x.is_finite()) {
                    return Err(RunError::NonFiniteInput { index: i as u32 });
                }
                let params = q.offset.iter().zip(&q.scale);
                for ((d, &x), (off, sc)) in dst.iter_mut().zip(v).zip(params) {
                    *d = quantize_linear((x - off) * sc, q.quant_scale, q.zero_point);
                }
            }
            // A blob without the integer input path (version 5, `FORMAT.md` §3.4), as the runtime.
            Input::I16(_) | Input::U8(_) if q.integer.is_empty() => {
                return Err(RunError::NoIntegerInput)
            }
            Input::I16(v) => {
                for ((d, &x), &(m, a, s)) in dst.iter_mut().zip(v).zip(&q.integer) {
                    *d = quantise_integer(i32::from(x), m, a, s);
                }
            }
            Input::U8(v) => {
                for ((d, &x), &(m, a, s)) in dst.iter_mut().zip(v).zip(&q.integer) {
                    *d = quantise_integer(i32::from(x), m, a, s);
                }
            }
        }
        Ok(())
    }

    /// Runs `rows` rows, row `r` given by `input(r)`. On error, the first failing row (0-based,
    /// within the batch) and the runtime's error for it.
    pub fn run<'a>(
        &self,
        rows: usize,
        input: impl Fn(usize) -> Input<'a>,
    ) -> Result<Int8Batch, (usize, RunError)> {
        let mut x = Int8Tensor {
            width: self.width,
            values: vec![0; rows * self.width],
            scale: self.input.quant_scale,
            zero_point: self.input.zero_point,
        };
        for (r, dst) in x.values.chunks_exact_mut(self.width.max(1)).enumerate() {
            let row = input(r);
            let got = match row {
                Input::F32(v) => v.len(),
                Input::I16(v) => v.len(),
                Input::U8(v) => v.len(),
            };
            if got != self.width {
                return Err((
                    r,
                    RunError::InputLength {
                        expected: self.width as u32,
                        got: got as u32,
                    },
                ));
            }
            self.load_row(row, dst).map_err(|e| (r, e))?;
        }
        let mut stages = vec![x];
        for layer in &self.layers {
            let next = match stages.last() {
                Some(prev) => dense(layer, prev, rows),
                None => break,
            };
            stages.push(next);
        }
        let out_len = self.layers.last().map_or(0, |l| l.outputs);
        let last = stages.last().cloned().unwrap_or(Int8Tensor {
            width: 0,
            values: Vec::new(),
            scale: 1.0,
            zero_point: 0,
        });
        let mut scores = vec![0f32; rows * out_len];
        let mut infer_class = Vec::with_capacity(rows);
        let mut classify_class = Vec::with_capacity(rows);
        for (r, s) in scores.chunks_exact_mut(out_len.max(1)).enumerate() {
            for (i, v) in s.iter_mut().enumerate() {
                *v = last.real(r, i);
            }
            let q = last.row(r);
            let (infer, classify) = match self.output {
                OutputKind::Sigmoid => {
                    for v in s.iter_mut() {
                        *v = sigmoid(*v);
                    }
                    let p = s.first().copied().unwrap_or(0.0);
                    (
                        usize::from(p > 0.5),
                        usize::from(q.first().is_some_and(|&v| v > last.zero_point)),
                    )
                }
                kind => {
                    if kind == OutputKind::Softmax {
                        softmax(s);
                    }
                    let bytes: Vec<u8> = q.iter().map(|&v| v as u8).collect();
                    (argmax(s).map_or(0, |(c, _)| c), argmax_i8(&bytes))
                }
            };
            infer_class.push(infer);
            classify_class.push(classify);
        }
        Ok(Int8Batch {
            rows,
            stages,
            scores,
            infer_class,
            classify_class,
        })
    }
}

/// The exact dot products `x · wᵀ` of `rows` rows (see the module docs), in i64.
fn dots(layer: &Int8Layer, x: &Int8Tensor, rows: usize) -> Vec<i64> {
    dots_in(layer, x, rows, layer.dot_bound() <= F32_EXACT)
}

/// [`dots`] in f32 (`single`) or f64.
fn dots_in(layer: &Int8Layer, x: &Int8Tensor, rows: usize, single: bool) -> Vec<i64> {
    let (n, m) = (layer.inputs, layer.outputs);
    if single {
        let a: Vec<f32> = x.values.iter().map(|&v| f32::from(v)).collect();
        let w: Vec<f32> = layer.weights.iter().map(|&v| f32::from(v)).collect();
        product(&a, &w, rows, n, m, 0.0f32)
            .into_iter()
            .map(|v| v as i64)
            .collect()
    } else {
        let a: Vec<f64> = x.values.iter().map(|&v| f64::from(v)).collect();
        let w: Vec<f64> = layer.weights.iter().map(|&v| f64::from(v)).collect();
        product(&a, &w, rows, n, m, 0.0f64)
            .into_iter()
            .map(|v| v as i64)
            .collect()
    }
}

/// `a · wᵀ` for row-major `a` (`rows × n`) and `w` (`m × n`), row-major `rows × m`.
pub(crate) fn product<T>(a: &[T], w: &[T], rows: usize, n: usize, m: usize, zero: T) -> Vec<T>
where
    T: ndarray::LinalgScalar,
{
    let mut c = Array2::from_elem((rows, m), zero);
    if let (Ok(a), Ok(w)) = (
        ArrayView2::from_shape((rows, n), a),
        ArrayView2::from_shape((m, n), w),
    ) {
        general_mat_mul(T::one(), &a, &w.t(), zero, &mut c);
    }
    c.into_raw_vec_and_offset().0
}

/// One int8 layer over the batch: exact dot products, bias, the runtime's requantisation.
fn dense(layer: &Int8Layer, x: &Int8Tensor, rows: usize) -> Int8Tensor {
    let m = layer.outputs;
    let acc = dots(layer, x, rows);
    let mut values = vec![0i8; rows * m];
    for (out, acc) in values
        .chunks_exact_mut(m.max(1))
        .zip(acc.chunks_exact(m.max(1)))
    {
        let params = layer.bias.iter().zip(&layer.multiplier).zip(&layer.shift);
        for ((o, &a), ((&b, &mult), &shift)) in out.iter_mut().zip(acc).zip(params) {
            // `Model::parse` proved `bias + dot` fits in i32; the kernels add in wrapping i32.
            let sum = (a as i32).wrapping_add(b);
            let q = requantise_validated(
                sum,
                mult,
                shift,
                layer.requant_zero_point,
                layer.act_min,
                layer.act_max,
            );
            *o = match &layer.table {
                Some(t) => t.get(usize::from(q as u8 ^ 0x80)).map_or(q, |&b| b as i8),
                None => q,
            };
        }
    }
    Int8Tensor {
        width: m,
        values,
        scale: layer.output_scale,
        zero_point: layer.zero_point,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Both products give the exact integer sums, at the f32 limit too: weights of ±127 over
    /// 1032 inputs of -128 make partial sums up to 1032 · 127 · 128 < 2^24.
    #[test]
    fn products_are_exact_integer_sums() {
        let (n, m, rows) = (1032usize, 3usize, 4usize);
        // xorshift32 (Marsaglia, 2003), seeded.
        let mut state = 0x0bad_5eed_u32;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            state
        };
        let mut weights: Vec<i8> = (0..n * m).map(|_| next() as i8).collect();
        weights[..n].fill(127);
        let mut values: Vec<i8> = (0..rows * n).map(|_| next() as i8).collect();
        values[..n].fill(-128);
        let layer = Int8Layer {
            inputs: n,
            outputs: m,
            weights,
            bias: vec![0; m],
            multiplier: vec![1 << 30; m],
            shift: vec![0; m],
            output_scale: 1.0,
            zero_point: 0,
            act_min: -128,
            act_max: 127,
            requant_zero_point: 0,
            table: None,
        };
        assert!(layer.dot_bound() <= F32_EXACT);
        let x = Int8Tensor {
            width: n,
            values,
            scale: 1.0,
            zero_point: 0,
        };
        let want: Vec<i64> = (0..rows)
            .flat_map(|r| {
                let (x, w) = (&x, &layer.weights);
                (0..m).map(move |o| {
                    (0..n)
                        .map(|i| i64::from(x.values[r * n + i]) * i64::from(w[o * n + i]))
                        .sum::<i64>()
                })
            })
            .collect();
        assert_eq!(want[0], -(n as i64) * 127 * 128);
        assert_eq!(dots_in(&layer, &x, rows, true), want);
        assert_eq!(dots_in(&layer, &x, rows, false), want);
    }
}
