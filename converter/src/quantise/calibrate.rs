//! Calibration: the range of every activation tensor over a calibration set, observed by running
//! the float pack through the runtime's own f32 path, with the statistics that tell whether a
//! few values set a range ([`super::spread`]).
use anyhow::{anyhow, bail, Result};
use kinglet_runtime::{Input, Model};

use super::least_error::least_error;
use super::percentile::percentile;
use super::spread::TensorStats;
use crate::dataset::Dataset;

/// How a tensor's range is taken from the observed values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RangeMethod {
    /// The smallest and largest value seen.
    MinMax,
    /// The `(100 - p)`-th and `p`-th percentiles (`p` in `(50, 100]`) of the tensor's values,
    /// by the rank of [`super::percentile`] (numpy's default), clipping rare outliers.
    Percentile(f64),
    /// Per tensor, the range with the smallest int8 quantisation error on the calibration
    /// values ([`super::least_error`]: a grid search, Nagel et al., 2021, §3.4).
    LeastError,
}

impl std::fmt::Display for RangeMethod {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            RangeMethod::MinMax => f.write_str("min/max"),
            RangeMethod::Percentile(p) => write!(f, "percentile {p}"),
            RangeMethod::LeastError => f.write_str("least-error"),
        }
    }
}

/// Observed `[min, max]` of one tensor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TensorRange {
    /// Lower end.
    pub min: f32,
    /// Upper end.
    pub max: f32,
}

/// What calibration found.
#[derive(Debug, Clone, PartialEq)]
pub struct Calibration {
    /// The method the ranges were taken with.
    pub method: RangeMethod,
    /// The range of tensor 0 (the scaled input) and of each layer's output (after its
    /// activation).
    pub ranges: Vec<TensorRange>,
    /// Statistics of each tensor, in the same order.
    pub tensors: Vec<TensorStats>,
    /// The scaled input of every row, row-major (tensor 0's values, as the first layer sees
    /// them in the float model).
    pub scaled_input: Vec<f32>,
    /// The mean of every element of every tensor over the rows, in the order of `ranges`
    /// (the float inputs of each layer: what bias correction needs).
    pub means: Vec<Vec<f64>>,
    /// For each layer with a pointwise activation, the range of its values before the
    /// activation (what the int8 table's input covers); `None` for the other layers.
    pub pre_activation: Vec<Option<TensorRange>>,
}

/// The name of tensor `index` in messages: `input` (the scaled input), then `layer N output`,
/// 1-based like the layer table of the pack report.
pub fn tensor_name(index: usize) -> String {
    if index == 0 {
        "input".into()
    } else {
        format!("layer {index} output")
    }
}

/// Row `r` (0-based) of the calibration file `source` as its loader's messages name rows: the
/// `.npy` loader by numpy's 0-based row index, the CSV loader by 1-based data row.
pub fn row_label(source: &str, r: usize) -> String {
    if source.to_ascii_lowercase().ends_with(".npy") {
        format!("row index {r}")
    } else {
        format!("row {} (1-based, header not counted)", r + 1)
    }
}

/// Calibrates every tensor over every row of `data`. `float_model` is the f32 pack of the model
/// being quantised.
pub fn calibrate(
    float_model: &Model<'_>,
    data: &Dataset,
    method: RangeMethod,
) -> Result<Calibration> {
    calibrate_observed(float_model, data, method, &|_| {})
}

/// Rows between two calls of a calibration's progress callback.
const PROGRESS_STEP: usize = 1024;

/// [`calibrate`], calling `progress` with the number of rows just run (every 1,024 rows and at
/// the end).
pub fn calibrate_observed(
    float_model: &Model<'_>,
    data: &Dataset,
    method: RangeMethod,
    progress: &dyn Fn(u64),
) -> Result<Calibration> {
    calibrate_widened(float_model, data, method, 1.0, progress)
}

/// A range `factor` times as wide about zero, `[factor · min, factor · max]` (`pack
/// --headroom`): room for values beyond any calibration row. 1 leaves it as it is.
pub fn widen(r: TensorRange, factor: f64) -> TensorRange {
    if factor == 1.0 {
        return r;
    }
    TensorRange {
        min: (f64::from(r.min) * factor) as f32,
        max: (f64::from(r.max) * factor) as f32,
    }
}

/// [`calibrate_observed`] with every layer's output range (and the range before a pointwise
/// activation) widened by `headroom` ([`widen`]); the input's range is left as the method
/// gives it. The statistics (clipped values) are those of the widened ranges.
pub fn calibrate_widened(
    float_model: &Model<'_>,
    data: &Dataset,
    method: RangeMethod,
    headroom: f64,
    progress: &dyn Fn(u64),
) -> Result<Calibration> {
    if !(headroom.is_finite() && headroom >= 1.0) {
        bail!("--headroom must be a number ≥ 1 (1 keeps the calibrated ranges), got {headroom}");
    }
    if data.rows == 0 {
        bail!("calibration set {} has no rows", data.source);
    }
    if let RangeMethod::Percentile(p) = method {
        if !(p > 50.0 && p <= 100.0) {
            bail!("percentile must be in (50, 100], got {p}");
        }
    }
    data.check_width(float_model.input_len())?;
    let widths: Vec<usize> = std::iter::once(float_model.input_len())
        .chain(float_model.layers().map(|l| l.desc.outputs as usize))
        .collect();
    let mut values: Vec<Vec<f32>> = widths
        .iter()
        .map(|w| Vec::with_capacity(w.saturating_mul(data.rows)))
        .collect();
    let mut scratch = vec![0u8; float_model.scratch_bytes()];
    let mut scores = vec![0f32; float_model.output_len()];
    for r in 0..data.rows {
        let row = data.row(r);
        float_model
            .infer_traced(Input::F32(row), &mut scratch, &mut scores, &mut |s| {
                if let Some(v) = values.get_mut(s.index) {
                    v.extend((0..s.values.len()).filter_map(|i| s.values.real(i)));
                }
            })
            .map_err(|e| anyhow!("{}: {}: {e}", data.source, row_label(&data.source, r)))?;
        if (r + 1) % PROGRESS_STEP == 0 {
            progress(PROGRESS_STEP as u64);
        }
    }
    progress((data.rows % PROGRESS_STEP) as u64);
    let mut ranges = Vec::with_capacity(values.len());
    let mut tensors = Vec::with_capacity(values.len());
    let means = values
        .iter()
        .zip(&widths)
        .map(|(v, &w)| element_means(v, w))
        .collect();
    for (t, (v, &width)) in values.iter().zip(&widths).enumerate() {
        if v.len() != width * data.rows {
            bail!(
                "internal: tensor {t} traced {} values for {} rows of width {width}",
                v.len(),
                data.rows
            );
        }
        let mut sorted = v.clone();
        sorted.sort_by(f32::total_cmp);
        let range = range_of(&sorted, method);
        let range = if t == 0 {
            range
        } else {
            widen(range, headroom)
        };
        tensors.push(TensorStats::of(tensor_name(t), v, &sorted, width, range));
        ranges.push(range);
    }
    let pre_activation = float_model
        .layers()
        .zip(&values)
        .map(|(l, x)| {
            pre_activation_range(l.desc, x, data.rows, method).map(|r| widen(r, headroom))
        })
        .collect();
    let scaled_input = values.into_iter().next().unwrap_or_default();
    Ok(Calibration {
        method,
        ranges,
        tensors,
        scaled_input,
        means,
        pre_activation,
    })
}

/// The mean of each of the `width` elements of row-major `values`, in f64.
pub fn element_means(values: &[f32], width: usize) -> Vec<f64> {
    let mut sum = vec![0f64; width];
    let mut rows = 0usize;
    for row in values.chunks_exact(width.max(1)) {
        for (s, &v) in sum.iter_mut().zip(row) {
            *s += f64::from(v);
        }
        rows += 1;
    }
    sum.iter().map(|s| s / rows.max(1) as f64).collect()
}

/// The range of a pointwise layer's affine output `W x + b` over the traced inputs `x`
/// (`rows` rows), by `method`; `None` for a layer without a pointwise activation.
fn pre_activation_range(
    l: &kinglet_runtime::unstable::wire::format::LayerDesc<'_>,
    x: &[f32],
    rows: usize,
    method: RangeMethod,
) -> Option<TensorRange> {
    l.pointwise()?;
    let layer = crate::host::layers::FloatLayer::new(l);
    let mut pre = Vec::with_capacity(rows * layer.outputs);
    for row in x.chunks_exact(layer.inputs.max(1)) {
        for (w, b) in layer
            .weights
            .chunks_exact(layer.inputs.max(1))
            .zip(&layer.bias)
        {
            pre.push(w.iter().zip(row).map(|(w, v)| w * v).sum::<f32>() + b);
        }
    }
    pre.sort_by(f32::total_cmp);
    Some(range_of(&pre, method))
}

/// The range of `sorted` (ascending) by `method`.
pub fn range_of(sorted: &[f32], method: RangeMethod) -> TensorRange {
    let (Some(&first), Some(&last)) = (sorted.first(), sorted.last()) else {
        return TensorRange { min: 0.0, max: 0.0 };
    };
    match method {
        RangeMethod::MinMax => TensorRange {
            min: first,
            max: last,
        },
        RangeMethod::Percentile(p) => TensorRange {
            min: percentile(sorted, 100.0 - p),
            max: percentile(sorted, p),
        },
        RangeMethod::LeastError => least_error(sorted).range,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn min_max_and_percentile_ranges() {
        let v: Vec<f32> = (0..=1000).map(|i| i as f32).collect();
        assert_eq!(
            range_of(&v, RangeMethod::MinMax),
            TensorRange {
                min: 0.0,
                max: 1000.0
            }
        );
        // numpy.percentile(np.arange(1001), [1, 99]) = [10, 990].
        assert_eq!(
            range_of(&v, RangeMethod::Percentile(99.0)),
            TensorRange {
                min: 10.0,
                max: 990.0
            }
        );
        let mut outlier = vec![1.0f32; 999];
        outlier.push(1e6);
        // numpy: np.percentile(v, 99.9) = 1000.999 (rank 998.001, a thousandth of the way to
        // the outlier), np.percentile(v, 99.8) = 1.0 (rank 997.002, between two ones).
        assert_eq!(
            range_of(&outlier, RangeMethod::Percentile(99.9)).max,
            1000.999
        );
        assert_eq!(range_of(&outlier, RangeMethod::Percentile(99.8)).max, 1.0);
    }

    #[test]
    fn the_default_percentile_clips_a_small_set() {
        // Regression: with the rank rounded on n - 1, 99.99 returned the largest value of any
        // set of 5,001 values or fewer. 765 values (51 rows of 15): rank 763.92.
        let mut v: Vec<f32> = (0..764).map(|i| i as f32).collect();
        v.push(1e6);
        let r = range_of(&v, RangeMethod::Percentile(99.99));
        assert!(r.max < 1e6, "{r:?}");
        assert!(r.min > 0.0, "{r:?}");
    }
}
