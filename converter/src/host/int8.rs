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
//! Where the CPU has AVX-512 VNNI, the products run instead on `host::vnni`'s integer kernel
//! (u8 × i8 → i32 multiply-adds, exact in wrapping i32; see there), about four times the f32
//! product's multiply rate; [`Int8Host::portable`] keeps the floating-point products, which
//! are also what every other host and Miri run.
//!
//! For the portable path we use a matrix-multiplication crate (`faer`, `host::product`) rather
//! than a hand-written i8 × i8 → i32 loop: it is cache-blocked and vectorised for the host at
//! run time (AVX-512, AVX2 and FMA where present), which plain safe Rust compiled for the
//! baseline x86-64 target is not.
use std::cell::RefCell;

use kinglet_runtime::unstable::output::{argmax, argmax_i8, sigmoid};
use kinglet_runtime::unstable::requant::requantise_validated;
use kinglet_runtime::OutputKind;
use kinglet_runtime::{Input, Model, Precision, RunError};

use super::input::{InputQuant, Lane};
use super::layers::{words, Int8Layer};
use super::product::Scalar;
use super::softmax::{one_vs_rest_rows, softmax_rows};

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

/// A layer's weights in the form its product runs in (see the module docs).
#[derive(Debug, Clone)]
enum Wide {
    F32(Vec<f32>),
    F64(Vec<f64>),
    /// Packed for the AVX-512 VNNI kernel, with the biases less the kernel's input shift
    /// (`bias − 128 · Σ_i w_oi`, wrapping).
    #[cfg(target_arch = "x86_64")]
    Vnni(super::vnni::Packed, Vec<i32>),
}

impl Wide {
    /// The portable exact product for `layer` (see the module docs).
    fn portable(l: &Int8Layer) -> Self {
        if l.dot_bound() <= F32_EXACT {
            Wide::F32(l.weights.iter().map(|&v| f32::from(v)).collect())
        } else {
            Wide::F64(l.weights.iter().map(|&v| f64::from(v)).collect())
        }
    }

    /// The VNNI kernel's form where this CPU has it (and `vnni`), else the portable one.
    fn new(l: &Int8Layer, vnni: bool) -> Self {
        #[cfg(target_arch = "x86_64")]
        if vnni {
            if let Some(p) = super::vnni::Packed::new(&l.weights, l.inputs, l.outputs) {
                let bias = l
                    .bias
                    .iter()
                    .zip(p.shift_sum())
                    .map(|(&b, &c)| b.wrapping_sub(c))
                    .collect();
                return Wide::Vnni(p, bias);
            }
        }
        let _ = vnni;
        Wide::portable(l)
    }

    /// Bytes per row of the VNNI kernel's input; `None` for the portable products.
    fn vnni_stride(&self) -> Option<usize> {
        match self {
            #[cfg(target_arch = "x86_64")]
            Wide::Vnni(p, _) => Some(p.stride()),
            _ => None,
        }
    }
}

/// An int8 blob read for batched evaluation.
#[derive(Debug, Clone)]
pub struct Int8Host {
    width: usize,
    input: InputQuant,
    layers: Vec<Int8Layer>,
    /// One per layer.
    wide: Vec<Wide>,
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

/// Buffers a thread reuses from batch to batch: the input as f32, a product's output.
#[derive(Default)]
struct Scratch {
    wide_input: Vec<f32>,
    /// The VNNI kernel's input (`q ^ 0x80`, rows padded) and output.
    unsigned: Vec<u8>,
    acc_i32: Vec<i32>,
    acc32: Vec<f32>,
    acc64: Vec<f64>,
    in32: Vec<f32>,
    in64: Vec<f64>,
}

thread_local! {
    static SCRATCH: RefCell<Scratch> = RefCell::new(Scratch::default());
}

/// `v` resized to `len` (its old contents kept or zeros: every caller overwrites it).
fn sized<T: Copy + Default>(v: &mut Vec<T>, len: usize) -> &mut [T] {
    if v.len() < len {
        v.resize(len, T::default());
    }
    v.get_mut(..len).unwrap_or_default()
}

/// [`Int8Host::run`] as a [`pulp::WithSimd`] operation.
struct Run<'h, F> {
    host: &'h Int8Host,
    rows: usize,
    input: F,
    scratch: &'h mut Scratch,
}

impl<'a, F: Fn(usize) -> Input<'a>> pulp::WithSimd for Run<'_, F> {
    type Output = Result<Int8Batch, (usize, RunError)>;
    #[inline(always)]
    fn with_simd<S: pulp::Simd>(self, _: S) -> Self::Output {
        self.host.run_with(self.rows, self.input, self.scratch)
    }
}

impl Int8Host {
    /// Reads `model`; `None` unless it is an int8 blob. Its products run on the AVX-512 VNNI
    /// kernel (`host::vnni`) where the CPU has it, else on the portable exact product.
    pub fn new(model: &Model<'_>) -> Option<Self> {
        Self::with_kernels(model, true)
    }

    /// [`Int8Host::new`] with the portable products only, whatever the CPU (what a host
    /// without AVX-512 VNNI runs): for tests and benchmarks of that path.
    pub fn portable(model: &Model<'_>) -> Option<Self> {
        Self::with_kernels(model, false)
    }

    fn with_kernels(model: &Model<'_>, vnni: bool) -> Option<Self> {
        if model.precision() != Precision::Int8 {
            return None;
        }
        let d = model.desc();
        let q = d.input_quant.as_ref()?;
        // An int16 input tensor (format version 7) is run row by row on the runtime itself.
        if q.width != kinglet_runtime::unstable::wire::format::InputWidth::I8 {
            return None;
        }
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
        let wide = layers.iter().map(|l| Wide::new(l, vnni)).collect();
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
            wide,
            output: d.output,
        })
    }

    /// Quantises one row into `dst` (and as [`Lane`]s into `wide`), as the runtime's input stage.
    #[inline(always)]
    fn load_row<L: Lane>(
        &self,
        input: Input<'_>,
        dst: &mut [i8],
        wide: &mut [L],
    ) -> Result<(), RunError> {
        match input {
            Input::F32(v) => self.input.floats(v, dst, wide),
            Input::I16(v) => self.input.integers(v, dst, wide),
            Input::U8(v) => self.input.integers(v, dst, wide),
        }
    }

    /// Runs `rows` rows, row `r` given by `input(r)`. On error, the first failing row (0-based,
    /// within the batch) and the runtime's error for it.
    pub fn run<'a>(
        &self,
        rows: usize,
        input: impl Fn(usize) -> Input<'a>,
    ) -> Result<Int8Batch, (usize, RunError)> {
        let go = |scratch: &mut Scratch| {
            super::vectorised(Run {
                host: self,
                rows,
                input,
                scratch,
            })
        };
        // A call from inside `input` on the same thread finds the buffers taken: it gets its own.
        SCRATCH.with(|cell| match cell.try_borrow_mut() {
            Ok(mut scratch) => go(&mut scratch),
            Err(_) => go(&mut Scratch::default()),
        })
    }

    /// Quantises `rows` rows (row `r` is `input(r)`) into `values` (`rows × width`) and, as
    /// [`Lane`]s, into `wide` (`rows × stride`, `stride ≥ width`).
    #[inline(always)]
    fn load_rows<'a, L: Lane>(
        &self,
        input: impl Fn(usize) -> Input<'a>,
        values: &mut [i8],
        wide: &mut [L],
        stride: usize,
    ) -> Result<(), (usize, RunError)> {
        let w = self.width;
        for (r, (dst, wd)) in values
            .chunks_exact_mut(w.max(1))
            .zip(wide.chunks_exact_mut(stride.max(1)))
            .enumerate()
        {
            let row = input(r);
            let got = match row {
                Input::F32(v) => v.len(),
                Input::I16(v) => v.len(),
                Input::U8(v) => v.len(),
            };
            if got != w {
                return Err((
                    r,
                    RunError::InputLength {
                        expected: w as u32,
                        got: got as u32,
                    },
                ));
            }
            self.load_row(row, dst, wd).map_err(|e| (r, e))?;
        }
        Ok(())
    }

    #[inline(always)]
    fn run_with<'a>(
        &self,
        rows: usize,
        input: impl Fn(usize) -> Input<'a>,
        scratch: &mut Scratch,
    ) -> Result<Int8Batch, (usize, RunError)> {
        let w = self.width;
        let mut values = vec![0i8; rows * w];
        // The first product's input is written while quantising: as unsigned bytes for the
        // VNNI kernel, as f32 for the portable one (no second pass over the rows).
        match self.wide.first().and_then(Wide::vnni_stride) {
            Some(stride) => {
                let wide = sized(&mut scratch.unsigned, rows * stride);
                self.load_rows(input, &mut values, wide, stride)?;
            }
            None => {
                let wide = sized(&mut scratch.wide_input, rows * w);
                self.load_rows(input, &mut values, wide, w)?;
            }
        }
        let mut stages = Vec::with_capacity(self.layers.len() + 1);
        stages.push(Int8Tensor {
            width: w,
            values,
            scale: self.input.quant_scale,
            zero_point: self.input.zero_point,
        });
        for (k, (layer, weights)) in self.layers.iter().zip(&self.wide).enumerate() {
            let Some(prev) = stages.last() else { break };
            let n = rows * layer.inputs;
            let values = match weights {
                Wide::F32(wt) => {
                    let a: &[f32] = if k == 0 {
                        scratch.wide_input.get(..n).unwrap_or(&[])
                    } else {
                        let a = sized(&mut scratch.in32, n);
                        for (d, &v) in a.iter_mut().zip(&prev.values) {
                            *d = f32::from(v);
                        }
                        a
                    };
                    let acc = sized(&mut scratch.acc32, rows * layer.outputs);
                    dots(layer, a, wt, rows, acc);
                    requantise(layer, acc, &layer.bias, |v| v as i32)
                }
                Wide::F64(wt) => {
                    let a = sized(&mut scratch.in64, n);
                    for (d, &v) in a.iter_mut().zip(&prev.values) {
                        *d = f64::from(v);
                    }
                    let acc = sized(&mut scratch.acc64, rows * layer.outputs);
                    dots(layer, a, wt, rows, acc);
                    // `Model::parse` proved `bias + dot` fits in i32; the kernels add in
                    // wrapping i32.
                    requantise(layer, acc, &layer.bias, |v| v as i64 as i32)
                }
                #[cfg(target_arch = "x86_64")]
                Wide::Vnni(p, bias) => {
                    let stride = p.stride();
                    if k > 0 {
                        let u = sized(&mut scratch.unsigned, rows * stride);
                        for (d, s) in u
                            .chunks_exact_mut(stride.max(1))
                            .zip(prev.values.chunks_exact(layer.inputs.max(1)))
                        {
                            for (d, &v) in d.iter_mut().zip(s) {
                                *d = u8::of(v);
                            }
                        }
                    }
                    let u = scratch.unsigned.get(..rows * stride).unwrap_or(&[]);
                    let acc = sized(&mut scratch.acc_i32, rows * layer.outputs);
                    p.product(u, rows, acc);
                    // `bias` has the kernel's input shift taken off (see `host::vnni`).
                    requantise(layer, acc, bias, |v| v)
                }
            };
            stages.push(Int8Tensor {
                width: layer.outputs,
                values,
                scale: layer.output_scale,
                zero_point: layer.zero_point,
            });
        }
        Ok(self.finish(rows, stages))
    }

    /// Scores and classes from the last tensor.
    fn finish(&self, rows: usize, stages: Vec<Int8Tensor>) -> Int8Batch {
        let out_len = self.layers.last().map_or(0, |l| l.outputs);
        let (last, scale, zp) = match stages.last() {
            Some(t) => (t.values.as_slice(), t.scale, t.zero_point),
            None => (&[][..], 1.0, 0),
        };
        let mut scores = vec![0f32; rows * out_len];
        for (v, &q) in scores.iter_mut().zip(last) {
            *v = (f32::from(q) - f32::from(zp)) * scale;
        }
        match self.output {
            OutputKind::Sigmoid => scores.iter_mut().for_each(|v| *v = sigmoid(*v)),
            OutputKind::Softmax => softmax_rows(&mut scores, out_len),
            OutputKind::OneVsRest => one_vs_rest_rows(&mut scores, out_len),
            OutputKind::Logits => {}
        }
        let mut infer_class = Vec::with_capacity(rows);
        let mut classify_class = Vec::with_capacity(rows);
        let mut bytes = Vec::with_capacity(out_len);
        for (s, q) in scores
            .chunks_exact(out_len.max(1))
            .zip(last.chunks_exact(out_len.max(1)))
        {
            let (infer, classify) = match self.output {
                OutputKind::Sigmoid => {
                    let p = s.first().copied().unwrap_or(0.0);
                    (
                        usize::from(p > 0.5),
                        usize::from(q.first().is_some_and(|&v| v > zp)),
                    )
                }
                _ => {
                    bytes.clear();
                    bytes.extend(q.iter().map(|&v| v as u8));
                    (argmax(s).map_or(0, |(c, _)| c), argmax_i8(&bytes))
                }
            };
            infer_class.push(infer);
            classify_class.push(classify);
        }
        Int8Batch {
            rows,
            stages,
            scores,
            infer_class,
            classify_class,
        }
    }
}

/// The exact dot products `x · wᵀ` of `rows` rows (see the module docs) into `acc`, as `T`.
fn dots<T: Scalar>(layer: &Int8Layer, x: &[T], w: &[T], rows: usize, acc: &mut [T]) {
    T::product_into(x, w, rows, layer.inputs, layer.outputs, acc);
}

/// One int8 layer's outputs over the batch from its exact dot products `acc` (`exact` turns
/// one into its integer): `bias` added in wrapping i32, the runtime's requantisation, then a
/// pointwise table if the layer has one.
#[inline(always)]
fn requantise<T: Copy>(
    layer: &Int8Layer,
    acc: &[T],
    bias: &[i32],
    exact: impl Fn(T) -> i32,
) -> Vec<i8> {
    let m = layer.outputs;
    let rows = acc.len().checked_div(m).unwrap_or(0);
    let mut values = vec![0i8; rows * m];
    let (zp, lo, hi) = (layer.requant_zero_point, layer.act_min, layer.act_max);
    for (out, acc) in values
        .chunks_exact_mut(m.max(1))
        .zip(acc.chunks_exact(m.max(1)))
    {
        let params = bias.iter().zip(&layer.multiplier).zip(&layer.shift);
        for ((o, &a), ((&b, &mult), &shift)) in out.iter_mut().zip(acc).zip(params) {
            // `Model::parse` proved `bias + dot` fits in i32; the kernels add in wrapping i32.
            let sum = exact(a).wrapping_add(b);
            *o = requantise_validated(sum, mult, shift, zp, lo, hi);
        }
    }
    if let Some(t) = &layer.table {
        for o in values.iter_mut() {
            *o = t.get(usize::from(*o as u8 ^ 0x80)).map_or(*o, |&b| b as i8);
        }
    }
    values
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
        let got32 = {
            let a: Vec<f32> = x.values.iter().map(|&v| f32::from(v)).collect();
            let w: Vec<f32> = layer.weights.iter().map(|&v| f32::from(v)).collect();
            let mut acc = vec![0f32; rows * m];
            dots(&layer, &a, &w, rows, &mut acc);
            acc.into_iter().map(|v| v as i64).collect::<Vec<_>>()
        };
        let got64 = {
            let a: Vec<f64> = x.values.iter().map(|&v| f64::from(v)).collect();
            let w: Vec<f64> = layer.weights.iter().map(|&v| f64::from(v)).collect();
            let mut acc = vec![0f64; rows * m];
            dots(&layer, &a, &w, rows, &mut acc);
            acc.into_iter().map(|v| v as i64).collect::<Vec<_>>()
        };
        assert_eq!(got32, want);
        assert_eq!(got64, want);
    }

    /// A pass started from inside another's input callback, on the same thread, gets its own
    /// buffers and the same results as a pass alone.
    #[test]
    fn nested_passes_give_the_same_results() {
        let blob = kinglet_builder::sample::tiny_int8()
            .encode_to_vec()
            .unwrap();
        let model = Model::parse(&blob).unwrap();
        let host = Int8Host::new(&model).unwrap();
        let rows: Vec<Vec<f32>> = (0..5)
            .map(|r| {
                (0..model.input_len())
                    .map(|i| (r * 7 + i * 3) as f32 * 0.1 - 1.0)
                    .collect()
            })
            .collect();
        let alone = host.run(rows.len(), |r| Input::F32(&rows[r])).unwrap();
        let inner = std::cell::RefCell::new(Vec::new());
        let outer = host
            .run(rows.len(), |r| {
                inner
                    .borrow_mut()
                    .push(host.run(rows.len(), |r| Input::F32(&rows[r])).unwrap());
                Input::F32(&rows[r])
            })
            .unwrap();
        assert_eq!(outer, alone);
        assert!(inner.borrow().iter().all(|b| *b == alone));
    }
}
