//! How a calibrated range sits over a tensor's values: how many values the range clips, and
//! whether a few values far from all the others set it.
//!
//! An int8 tensor spends its 255 steps evenly over its range, so a range stretched by a few
//! values leaves the rest a small share of the steps (one row of `3e38` among fifty ordinary
//! rows left them less than one step, and the model's accuracy fell to chance). The rule below
//! is our own, common practice, no source:
//!
//! - **core**: the tensor's values without the `k` lowest and the `k` highest, where `k` is 1 %
//!   of the values but at least one row's worth (the tensor's width, since a bad row puts one
//!   value in every element of each tensor), and at most a quarter of them;
//! - **far values**: values more than the core's own width beyond it (both the core and the
//!   range include 0, as the quantiser's ranges do);
//! - **spread**: the width of the calibrated range over the width of all the other values
//!   (those not far); the other values get `255 / spread` of the 255 int8 steps;
//! - a range is **dominated** when there are far values and its spread is at least
//!   [`DOMINATED_SPREAD`]: far values set it, or pull it out (a percentile interpolated between
//!   an ordinary value and a far one lies far out too). A core of width 0 (a ReLU output that is 0 almost everywhere)
//!   has no far values: a sparse tensor is not an outlier.
use serde::Serialize;

use super::calibrate::TensorRange;

/// Share of the values left out on each side to form the core (1 %).
pub const CORE_TRIM: f64 = 0.01;

/// Spread from which a range with far values is reported as dominated by them: the other
/// values then get at most 255 / 8 ≈ 32 of the 255 int8 steps (5 bits instead of 8).
pub const DOMINATED_SPREAD: f64 = 8.0;

/// The rows listed by number in a tensor's statistics (the count says how many there are).
pub const ROWS_LISTED: usize = 5;

/// The calibration statistics of one tensor.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TensorStats {
    /// `input` (the scaled input) or `layer N output` (1-based).
    pub tensor: String,
    /// Values observed (rows × width).
    pub values: usize,
    /// Smallest value observed.
    pub observed_min: f32,
    /// Largest value observed.
    pub observed_max: f32,
    /// The calibrated range: lower end.
    pub min: f32,
    /// The calibrated range: upper end.
    pub max: f32,
    /// Values below the calibrated range (they saturate to its lower end).
    pub clipped_below: usize,
    /// Values above the calibrated range (they saturate to its upper end).
    pub clipped_above: usize,
    /// Values left out on each side to form the core.
    pub core_trim: usize,
    /// Far values below the core.
    pub far_below: usize,
    /// Far values above the core.
    pub far_above: usize,
    /// Rows holding a far value (0-based row indices, at most [`ROWS_LISTED`]).
    pub far_rows: Vec<usize>,
    /// How many rows hold a far value.
    pub far_row_count: usize,
    /// Lower end of the values that are not far.
    pub others_min: f32,
    /// Upper end of the values that are not far.
    pub others_max: f32,
    /// Width of the calibrated range over the width of the values that are not far (both
    /// including 0); `None` when those are all 0.
    pub spread: Option<f64>,
    /// A few far values set the range (see the module documentation).
    pub dominated: bool,
}

/// `[min(lo, 0), max(hi, 0)]` as an f64 width: the extent the quantiser covers.
fn width_with_zero(lo: f32, hi: f32) -> f64 {
    f64::from(hi.max(0.0)) - f64::from(lo.min(0.0))
}

impl TensorStats {
    /// The statistics of a tensor whose `values` come `width` per row, in row order; `sorted`
    /// holds the same values ascending, `range` is the calibrated range.
    pub fn of(
        tensor: String,
        values: &[f32],
        sorted: &[f32],
        width: usize,
        range: TensorRange,
    ) -> Self {
        let n = sorted.len();
        let observed_min = sorted.first().copied().unwrap_or(0.0);
        let observed_max = sorted.last().copied().unwrap_or(0.0);
        let k = ((n as f64 * CORE_TRIM).ceil() as usize)
            .max(width)
            .min(n.saturating_sub(1) / 4);
        let core = (sorted.get(k), sorted.get(n.saturating_sub(1 + k)));
        let far_bounds = match core {
            (Some(&lo), Some(&hi)) if k > 0 => {
                let w = width_with_zero(lo, hi);
                (w > 0.0).then(|| (f64::from(lo.min(0.0)) - w, f64::from(hi.max(0.0)) + w))
            }
            _ => None,
        };
        let mut s = TensorStats {
            tensor,
            values: n,
            observed_min,
            observed_max,
            min: range.min,
            max: range.max,
            clipped_below: values.iter().filter(|&&v| v < range.min).count(),
            clipped_above: values.iter().filter(|&&v| v > range.max).count(),
            core_trim: if far_bounds.is_some() { k } else { 0 },
            far_below: 0,
            far_above: 0,
            far_rows: Vec::new(),
            far_row_count: 0,
            others_min: observed_min,
            others_max: observed_max,
            spread: None,
            dominated: false,
        };
        let mut others = (f32::INFINITY, f32::NEG_INFINITY);
        let mut last_row = None;
        for (i, &v) in values.iter().enumerate() {
            let x = f64::from(v);
            let far = match far_bounds {
                Some((below, _)) if x < below => {
                    s.far_below += 1;
                    true
                }
                Some((_, above)) if x > above => {
                    s.far_above += 1;
                    true
                }
                _ => false,
            };
            if far {
                let row = i / width.max(1);
                if last_row != Some(row) {
                    last_row = Some(row);
                    s.far_row_count += 1;
                    if s.far_rows.len() < ROWS_LISTED {
                        s.far_rows.push(row);
                    }
                }
            } else {
                others = (others.0.min(v), others.1.max(v));
            }
        }
        if others.0 <= others.1 {
            (s.others_min, s.others_max) = others;
        }
        let w_others = width_with_zero(s.others_min, s.others_max);
        if w_others > 0.0 {
            let spread = width_with_zero(range.min, range.max) / w_others;
            s.spread = Some(spread);
            s.dominated = s.far() > 0 && spread >= DOMINATED_SPREAD;
        }
        s
    }

    /// The far values, both sides.
    pub fn far(&self) -> usize {
        self.far_below + self.far_above
    }

    /// The far values on the side that has more of them.
    pub fn far_per_side(&self) -> usize {
        self.far_below.max(self.far_above)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn stats(values: &[f32], width: usize, range: Option<TensorRange>) -> TensorStats {
        let mut sorted = values.to_vec();
        sorted.sort_by(f32::total_cmp);
        let range = range.unwrap_or(TensorRange {
            min: sorted[0],
            max: sorted[sorted.len() - 1],
        });
        TensorStats::of("t".into(), values, &sorted, width, range)
    }

    /// 50 rows of 3 values in [-1, 1] (a fixed pattern), then `bad` as one more row.
    fn rows_with(bad: Option<[f32; 3]>) -> Vec<f32> {
        let mut v: Vec<f32> = (0..150)
            .map(|i| ((i * 37 % 101) as f32 / 50.0) - 1.0)
            .collect();
        if let Some(b) = bad {
            v.extend(b);
        }
        v
    }

    #[test]
    fn one_bad_row_dominates_the_range() {
        let v = rows_with(Some([1e6, 2e6, -5.0]));
        let s = stats(&v, 3, None);
        // 153 values: k = max(ceil(1.53), 3) = 3; the core is the ordinary values' range.
        assert_eq!(s.core_trim, 3);
        assert_eq!((s.far_below, s.far_above, s.far()), (1, 2, 3));
        assert_eq!((s.far_rows.clone(), s.far_row_count), (vec![50], 1));
        assert_eq!((s.others_min, s.others_max), (-1.0, 1.0));
        // Range [-5, 2e6] over the others' [-1, 1]: (2e6 + 5) / 2.
        assert_eq!(s.spread, Some((2e6 + 5.0) / 2.0));
        assert!(s.dominated);
        assert_eq!(s.far_per_side(), 2);
    }

    #[test]
    fn ordinary_rows_are_not_flagged() {
        let s = stats(&rows_with(None), 3, None);
        assert_eq!((s.far_below, s.far_above), (0, 0));
        assert_eq!(s.spread, Some(1.0));
        assert!(!s.dominated);
        // A mildly long tail: a value two core widths beyond the core is far, but its spread
        // (5 + 1) / 2 = 3 is under 8, so the range is not reported.
        let s = stats(&rows_with(Some([5.0, 0.0, 0.0])), 3, None);
        assert_eq!(s.far_above, 1);
        assert_eq!(s.spread, Some(3.0));
        assert!(!s.dominated);
    }

    #[test]
    fn a_clipped_outlier_no_longer_sets_the_range() {
        let v = rows_with(Some([1e6, 2e6, -5.0]));
        let s = stats(
            &v,
            3,
            Some(TensorRange {
                min: -1.0,
                max: 1.0,
            }),
        );
        assert_eq!((s.clipped_below, s.clipped_above), (1, 2));
        assert_eq!(s.spread, Some(1.0));
        assert!(!s.dominated);
        // A range that clips every far value but still reaches towards them (a percentile
        // interpolated between 1 and 1e6) is dominated all the same.
        let s = stats(
            &v,
            3,
            Some(TensorRange {
                min: -1.0,
                max: 9e5,
            }),
        );
        assert_eq!(s.clipped_above, 2);
        assert!(s.dominated);
    }

    #[test]
    fn a_sparse_relu_output_is_not_an_outlier() {
        // 99 % zeros: the core is [0, 0], so nothing is far, whatever the few non-zeros are.
        let mut v = vec![0.0f32; 990];
        v.extend((0..10).map(|i| i as f32 * 100.0));
        let s = stats(&v, 1, None);
        assert_eq!(s.core_trim, 0);
        assert_eq!((s.far_below, s.far_above), (0, 0));
        assert_eq!(s.spread, Some(1.0));
        assert!(!s.dominated);
    }

    #[test]
    fn tiny_sets_have_no_core() {
        let s = stats(&[1.0, 2.0, 1e9], 1, None);
        assert_eq!(s.core_trim, 0);
        assert!(!s.dominated);
    }
}
