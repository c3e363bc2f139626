//! [`super::calibrate::calibrate_observed`] without holding the traced values: three passes over
//! rows that can be read again (a `.npy` or CSV file read a chunk at a time), each running every row
//! through the float model's traced f32 path as calibration does.
//!
//! Rows come from a [`FilePasses`] (or, for tests, a [`Dataset`] in memory).
//!
//! 1. counts the upper halves of every value's key ([`super::order_stats::Coarse`]), the ends,
//!    and each element's sum (the means bias correction uses, summed in row order as
//!    [`super::calibrate::element_means`] sums them);
//! 2. counts the lower halves in the bins that hold the ranks the range and the core need
//!    ([`super::order_stats::Fine`]): those values exactly, as a full sort gives them;
//! 3. with the ranges and cores known, counts in row order what the statistics count
//!    ([`super::spread::SpreadScan`]) and looks for rows that drown the first layer's biases
//!    ([`super::plausible::BiasScan`]).
//!
//! The min/max and percentile ranges, the statistics and the means are those of the whole-file
//! calibration bit for bit. The least-error search sums the error of every value in sorted
//! order and needs the values themselves; it is not offered here.
use std::collections::BTreeMap;

use anyhow::{anyhow, bail, Result};
use kinglet_runtime::{Input, Model};

use super::calibrate::{row_label, tensor_name, Calibration, RangeMethod, TensorRange};
use super::order_stats::{Coarse, Fine};
use super::percentile::{percentile_at, percentile_ranks};
use super::plausible::{BiasScan, BiasesLost};
use super::spread::{core_trim, Sorted, SpreadScan};
use crate::dataset::{Dataset, DatasetError, LoadOptions, RowStream};
use crate::graph::DenseLayer;
use crate::host::layers::FloatLayer;

/// Calibration rows that can be read more than once, a chunk at a time.
pub trait Passes {
    /// Rows.
    fn rows(&self) -> usize;
    /// Features per row.
    fn width(&self) -> usize;
    /// Where the rows come from, for messages.
    fn source(&self) -> &str;
    /// Calls `each` with every chunk of rows, in row order.
    ///
    /// # Errors
    /// A read error, or the first error of `each`.
    fn pass(&self, each: &mut dyn FnMut(&Dataset) -> Result<()>) -> Result<()>;
}

impl Passes for Dataset {
    fn rows(&self) -> usize {
        self.rows
    }
    fn width(&self) -> usize {
        self.width
    }
    fn source(&self) -> &str {
        &self.source
    }
    fn pass(&self, each: &mut dyn FnMut(&Dataset) -> Result<()>) -> Result<()> {
        each(self)
    }
}

/// The rows of a file read `chunk_rows` at a time on every pass ([`RowStream`]: a C-order
/// `.npy` file or a CSV file).
#[derive(Debug)]
pub struct FilePasses {
    stream: RowStream,
    chunk_rows: usize,
}

impl FilePasses {
    /// `path`'s rows as `opts` reads them (a CSV label column is left out); `Ok(None)` when the
    /// file would be read whole (a Fortran-order `.npy` array).
    ///
    /// # Errors
    /// Those of [`RowStream::open`]: the file's first bad field, as the whole-file loader finds it.
    pub fn open(
        path: &std::path::Path,
        opts: &LoadOptions,
        chunk_rows: usize,
    ) -> Result<Option<Self>, DatasetError> {
        let mut stream = RowStream::open(path, opts)?;
        drop(stream.take_labels());
        Ok(stream
            .streamed()
            .then_some(FilePasses { stream, chunk_rows }))
    }
}

impl Passes for FilePasses {
    fn rows(&self) -> usize {
        self.stream.rows()
    }
    fn width(&self) -> usize {
        self.stream.width()
    }
    fn source(&self) -> &str {
        self.stream.source()
    }
    fn pass(&self, each: &mut dyn FnMut(&Dataset) -> Result<()>) -> Result<()> {
        let mut s = self.stream.reopen()?;
        while let Some(chunk) = s.next_chunk(self.chunk_rows)? {
            each(&chunk)?;
        }
        Ok(())
    }
}

/// What the streamed calibration found.
#[derive(Debug, Clone)]
pub struct Streamed {
    /// The calibration (without the scaled input rows, which it does not keep).
    pub calibration: Calibration,
    /// Rows on which the float model loses every first-layer bias within the input range.
    pub biases_lost: Option<BiasesLost>,
}

/// Rows a pass reads at a time from a file (1 MB of f32 rows per 16 features).
pub const CHUNK_ROWS: usize = 16_384;

/// Passes over the rows: how many the streamed calibration makes.
pub const PASSES: usize = 3;

/// Runs every row of `passes` through `float_model`'s traced path, calling `each` with the
/// row's traced tensors (tensor 0 the scaled input, then each layer's output).
fn trace_pass(
    float_model: &Model<'_>,
    passes: &dyn Passes,
    progress: &dyn Fn(u64),
    each: &mut dyn FnMut(&[Vec<f32>]),
) -> Result<()> {
    let widths = widths(float_model);
    let mut traced: Vec<Vec<f32>> = widths.iter().map(|&w| Vec::with_capacity(w)).collect();
    let mut scratch = vec![0u8; float_model.scratch_bytes()];
    let mut scores = vec![0f32; float_model.output_len()];
    let source = passes.source().to_string();
    let mut first = 0usize;
    passes.pass(&mut |chunk| {
        for r in 0..chunk.rows {
            traced.iter_mut().for_each(Vec::clear);
            float_model
                .infer_traced(
                    Input::F32(chunk.row(r)),
                    &mut scratch,
                    &mut scores,
                    &mut |s| {
                        if let Some(v) = traced.get_mut(s.index) {
                            v.extend((0..s.values.len()).filter_map(|i| s.values.real(i)));
                        }
                    },
                )
                .map_err(|e| anyhow!("{source}: {}: {e}", row_label(&source, first + r)))?;
            for (t, (v, &w)) in traced.iter().zip(&widths).enumerate() {
                if v.len() != w {
                    bail!(
                        "internal: tensor {t} traced {} values for a row of width {w}",
                        v.len()
                    );
                }
            }
            each(&traced);
        }
        first += chunk.rows;
        progress(chunk.rows as u64);
        Ok(())
    })
}

fn widths(float_model: &Model<'_>) -> Vec<usize> {
    std::iter::once(float_model.input_len())
        .chain(float_model.layers().map(|l| l.desc.outputs as usize))
        .collect()
}

/// The affine outputs `W x + b` of a pointwise layer for one input row, as
/// [`super::calibrate`] computes them.
fn affine(layer: &FloatLayer, x: &[f32], out: &mut Vec<f32>) {
    out.clear();
    for (w, b) in layer
        .weights
        .chunks_exact(layer.inputs.max(1))
        .zip(&layer.bias)
    {
        out.push(w.iter().zip(x).map(|(w, v)| w * v).sum::<f32>() + b);
    }
}

/// The ranks of the sorted values a range by `method` reads.
fn range_ranks(n: usize, method: RangeMethod) -> Vec<usize> {
    match method {
        RangeMethod::Percentile(p) => {
            let mut r = percentile_ranks(n, 100.0 - p);
            r.extend(percentile_ranks(n, p));
            r
        }
        RangeMethod::MinMax | RangeMethod::LeastError => Vec::new(),
    }
}

/// `sorted[i]` from the ends of `coarse` and the values `fine` selected.
fn sorted_at(coarse: &Coarse, picked: &BTreeMap<usize, f32>, i: usize) -> Option<f32> {
    let n = coarse.len();
    if i == 0 && n > 0 {
        Some(coarse.first())
    } else if i + 1 == n {
        Some(coarse.last())
    } else {
        picked.get(&i).copied()
    }
}

fn range_from(coarse: &Coarse, picked: &BTreeMap<usize, f32>, method: RangeMethod) -> TensorRange {
    if coarse.is_empty() {
        return TensorRange { min: 0.0, max: 0.0 };
    }
    let n = coarse.len();
    let at = |i: usize| sorted_at(coarse, picked, i);
    match method {
        RangeMethod::Percentile(p) => TensorRange {
            min: percentile_at(n, 100.0 - p, &at),
            max: percentile_at(n, p, &at),
        },
        RangeMethod::MinMax | RangeMethod::LeastError => TensorRange {
            min: coarse.first(),
            max: coarse.last(),
        },
    }
}

/// Calibrates every tensor over every row of `passes` by `method` (min/max or a percentile) in
/// [`PASSES`] passes; `first_layer` (the model's, for the bias check) when there is one.
/// `progress` is called with the rows of each chunk of each pass.
///
/// # Errors
/// Those of [`super::calibrate::calibrate_observed`], a read error of a pass, and
/// [`RangeMethod::LeastError`] (which needs the values).
pub fn calibrate_streamed(
    float_model: &Model<'_>,
    passes: &dyn Passes,
    method: RangeMethod,
    first_layer: Option<&DenseLayer>,
    progress: &dyn Fn(u64),
) -> Result<Streamed> {
    let rows = passes.rows();
    if rows == 0 {
        bail!("calibration set {} has no rows", passes.source());
    }
    match method {
        RangeMethod::Percentile(p) if !(p > 50.0 && p <= 100.0) => {
            bail!("percentile must be in (50, 100], got {p}")
        }
        RangeMethod::LeastError => {
            bail!("internal: the least-error range needs every calibration value; calibrate the whole file")
        }
        _ => {}
    }
    if passes.width() != float_model.input_len() {
        return Err(DatasetError::WrongWidth {
            source_name: passes.source().to_string(),
            found: passes.width(),
            expected: float_model.input_len(),
        }
        .into());
    }
    let widths = widths(float_model);
    // Layer k reads tensor k; the pointwise ones also get their affine outputs' range.
    let pointwise: Vec<Option<FloatLayer>> = float_model
        .layers()
        .map(|l| l.desc.pointwise().map(|_| FloatLayer::new(l.desc)))
        .collect();
    let mut pre_row = Vec::new();

    // Pass 1.
    let mut coarse: Vec<Coarse> = widths.iter().map(|_| Coarse::default()).collect();
    let mut pre_coarse: Vec<Option<Coarse>> = pointwise
        .iter()
        .map(|p| p.as_ref().map(|_| Coarse::default()))
        .collect();
    let mut sums: Vec<Vec<f64>> = widths.iter().map(|&w| vec![0f64; w]).collect();
    trace_pass(float_model, passes, progress, &mut |traced| {
        for ((v, c), s) in traced.iter().zip(&mut coarse).zip(&mut sums) {
            for (x, sum) in v.iter().zip(s.iter_mut()) {
                c.add(*x);
                *sum += f64::from(*x);
            }
        }
        for ((l, c), x) in pointwise.iter().zip(&mut pre_coarse).zip(traced) {
            if let (Some(l), Some(c)) = (l, c) {
                affine(l, x, &mut pre_row);
                pre_row.iter().for_each(|&v| c.add(v));
            }
        }
    })?;
    let means = sums
        .iter()
        .map(|s| s.iter().map(|x| x / rows as f64).collect())
        .collect();

    // Pass 2.
    let cores: Vec<usize> = coarse
        .iter()
        .zip(&widths)
        .map(|(c, &w)| core_trim(c.len(), w))
        .collect();
    let mut fine: Vec<Fine> = coarse
        .iter()
        .zip(&cores)
        .map(|(c, &k)| {
            let n = c.len();
            let mut ranks = range_ranks(n, method);
            ranks.push(k);
            ranks.push(n.saturating_sub(1 + k));
            c.select(&ranks)
        })
        .collect();
    let mut pre_fine: Vec<Option<Fine>> = pre_coarse
        .iter()
        .map(|c| c.as_ref().map(|c| c.select(&range_ranks(c.len(), method))))
        .collect();
    trace_pass(float_model, passes, progress, &mut |traced| {
        for (v, f) in traced.iter().zip(&mut fine) {
            v.iter().for_each(|&x| f.add(x));
        }
        for ((l, f), x) in pointwise.iter().zip(&mut pre_fine).zip(traced) {
            if let (Some(l), Some(f)) = (l, f) {
                affine(l, x, &mut pre_row);
                pre_row.iter().for_each(|&v| f.add(v));
            }
        }
    })?;
    let picked: Vec<BTreeMap<usize, f32>> = fine.iter().map(Fine::values).collect();
    let ranges: Vec<TensorRange> = coarse
        .iter()
        .zip(&picked)
        .map(|(c, p)| range_from(c, p, method))
        .collect();
    let pre_activation = pre_coarse
        .iter()
        .zip(&pre_fine)
        .map(|(c, f)| match (c, f) {
            (Some(c), Some(f)) => Some(range_from(c, &f.values(), method)),
            _ => None,
        })
        .collect();

    // Pass 3.
    let mut scans: Vec<SpreadScan> = coarse
        .iter()
        .zip(&picked)
        .zip(&cores)
        .zip(ranges.iter().zip(&widths))
        .enumerate()
        .map(|(t, (((c, p), &k), (&range, &width)))| {
            let n = c.len();
            let sorted = Sorted {
                n,
                first: c.first(),
                last: c.last(),
                core: (sorted_at(c, p, k), sorted_at(c, p, n.saturating_sub(1 + k))),
            };
            SpreadScan::new(tensor_name(t), sorted, width, range)
        })
        .collect();
    let mut bias_scan = match (first_layer, ranges.first()) {
        (Some(l), Some(&r)) => BiasScan::new(l, r),
        _ => None,
    };
    trace_pass(float_model, passes, progress, &mut |traced| {
        for (v, s) in traced.iter().zip(&mut scans) {
            v.iter().for_each(|&x| s.add(x));
        }
        if let (Some(b), Some(x)) = (bias_scan.as_mut(), traced.first()) {
            b.add_row(x);
        }
    })?;
    Ok(Streamed {
        calibration: Calibration {
            method,
            ranges,
            tensors: scans.into_iter().map(SpreadScan::finish).collect(),
            scaled_input: Vec::new(),
            means,
            pre_activation,
        },
        biases_lost: bias_scan.and_then(BiasScan::finish),
    })
}
