//! Calibration: the range of every activation tensor over a calibration set, observed by running
//! the float pack through the runtime's own f32 path.
use anyhow::{bail, Result};
use kinglet_runtime::{Input, Model};

use crate::dataset::Dataset;

/// How a tensor's range is taken from the observed values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RangeMethod {
    /// The smallest and largest value seen.
    MinMax,
    /// The `p`-th and `(100 - p)`-th percentiles (`p` in `(50, 100]`), clipping rare outliers.
    Percentile(f64),
}

impl std::fmt::Display for RangeMethod {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            RangeMethod::MinMax => f.write_str("min/max"),
            RangeMethod::Percentile(p) => write!(f, "percentile {p}"),
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

/// The ranges of tensor 0 (the scaled input) and of each layer's output (after its activation),
/// over every row of `data`. `float_model` is the f32 pack of the model being quantised.
pub fn calibrate(
    float_model: &Model<'_>,
    data: &Dataset,
    method: RangeMethod,
) -> Result<Vec<TensorRange>> {
    if data.rows == 0 {
        bail!("calibration set {} has no rows", data.source);
    }
    if let RangeMethod::Percentile(p) = method {
        if !(p > 50.0 && p <= 100.0) {
            bail!("percentile must be in (50, 100], got {p}");
        }
    }
    data.check_width(float_model.input_len())?;
    let tensors = float_model.desc().layers.len() + 1;
    let mut values: Vec<Vec<f32>> = vec![Vec::new(); tensors];
    let mut arena = vec![0u8; float_model.arena_bytes()];
    let mut scores = vec![0f32; float_model.output_len()];
    for r in 0..data.rows {
        let row = data.row(r);
        float_model
            .infer_traced(Input::F32(row), &mut arena, &mut scores, &mut |s| {
                if let Some(v) = values.get_mut(s.index) {
                    v.extend((0..s.values.len()).filter_map(|i| s.values.real(i)));
                }
            })
            .map_err(|e| anyhow::anyhow!("calibration row {}: {e}", r + 1))?;
    }
    Ok(values.into_iter().map(|v| range_of(v, method)).collect())
}

fn range_of(mut v: Vec<f32>, method: RangeMethod) -> TensorRange {
    if v.is_empty() {
        return TensorRange { min: 0.0, max: 0.0 };
    }
    match method {
        RangeMethod::MinMax => TensorRange {
            min: v.iter().copied().fold(f32::INFINITY, f32::min),
            max: v.iter().copied().fold(f32::NEG_INFINITY, f32::max),
        },
        RangeMethod::Percentile(p) => {
            v.sort_by(f32::total_cmp);
            let at = |q: f64| {
                // Nearest-rank percentile (common practice, no source).
                let rank = ((q / 100.0) * (v.len() - 1) as f64).round() as usize;
                v.get(rank.min(v.len() - 1)).copied().unwrap_or(0.0)
            };
            TensorRange {
                min: at(100.0 - p),
                max: at(p),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn min_max_and_percentile_ranges() {
        let v: Vec<f32> = (0..=1000).map(|i| i as f32).collect();
        assert_eq!(
            range_of(v.clone(), RangeMethod::MinMax),
            TensorRange {
                min: 0.0,
                max: 1000.0
            }
        );
        let r = range_of(v, RangeMethod::Percentile(99.0));
        assert_eq!(
            r,
            TensorRange {
                min: 10.0,
                max: 990.0
            }
        );
        let mut outlier = vec![1.0f32; 999];
        outlier.push(1e6);
        assert_eq!(range_of(outlier, RangeMethod::Percentile(99.9)).max, 1.0);
    }
}
