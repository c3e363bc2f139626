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
        let k = core_trim(n, width);
        let mut scan = SpreadScan::new(
            tensor,
            Sorted {
                n,
                first: sorted.first().copied().unwrap_or(0.0),
                last: sorted.last().copied().unwrap_or(0.0),
                core: (
                    sorted.get(k).copied(),
                    sorted.get(n.saturating_sub(1 + k)).copied(),
                ),
            },
            width,
            range,
        );
        for &v in values {
            scan.add(v);
        }
        scan.finish()
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

/// Values left out on each side of `n` values `width` per row to form the core (the `k` of the
/// module documentation): the core is `sorted[k]..=sorted[n - 1 - k]`.
pub fn core_trim(n: usize, width: usize) -> usize {
    ((n as f64 * CORE_TRIM).ceil() as usize)
        .max(width)
        .min(n.saturating_sub(1) / 4)
}

/// What the statistics need of a tensor's sorted values: how many, the first and last, and the
/// core's ends (`sorted[k]`, `sorted[n - 1 - k]` with `k` = [`core_trim`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sorted {
    /// Values.
    pub n: usize,
    /// `sorted[0]`.
    pub first: f32,
    /// `sorted[n - 1]`.
    pub last: f32,
    /// `sorted[k]` and `sorted[n - 1 - k]`.
    pub core: (Option<f32>, Option<f32>),
}

/// [`TensorStats::of`] a value at a time, in row order, once the sorted values' ends and core
/// are known (a second pass over the values).
#[derive(Debug, Clone)]
pub struct SpreadScan {
    s: TensorStats,
    far_bounds: Option<(f64, f64)>,
    width: usize,
    range: TensorRange,
    others: (f32, f32),
    last_row: Option<usize>,
    index: usize,
}

impl SpreadScan {
    /// The scan of a tensor `width` per row, calibrated to `range`.
    pub fn new(tensor: String, sorted: Sorted, width: usize, range: TensorRange) -> Self {
        let k = core_trim(sorted.n, width);
        let far_bounds = match sorted.core {
            (Some(lo), Some(hi)) if k > 0 => {
                let w = width_with_zero(lo, hi);
                (w > 0.0).then(|| (f64::from(lo.min(0.0)) - w, f64::from(hi.max(0.0)) + w))
            }
            _ => None,
        };
        SpreadScan {
            s: TensorStats {
                tensor,
                values: sorted.n,
                observed_min: sorted.first,
                observed_max: sorted.last,
                min: range.min,
                max: range.max,
                clipped_below: 0,
                clipped_above: 0,
                core_trim: if far_bounds.is_some() { k } else { 0 },
                far_below: 0,
                far_above: 0,
                far_rows: Vec::new(),
                far_row_count: 0,
                others_min: sorted.first,
                others_max: sorted.last,
                spread: None,
                dominated: false,
            },
            far_bounds,
            width,
            range,
            others: (f32::INFINITY, f32::NEG_INFINITY),
            last_row: None,
            index: 0,
        }
    }

    /// The next value, in row order.
    pub fn add(&mut self, v: f32) {
        let s = &mut self.s;
        s.clipped_below += usize::from(v < self.range.min);
        s.clipped_above += usize::from(v > self.range.max);
        let x = f64::from(v);
        let far = match self.far_bounds {
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
            let row = self.index / self.width.max(1);
            if self.last_row != Some(row) {
                self.last_row = Some(row);
                s.far_row_count += 1;
                if s.far_rows.len() < ROWS_LISTED {
                    s.far_rows.push(row);
                }
            }
        } else {
            self.others = (self.others.0.min(v), self.others.1.max(v));
        }
        self.index += 1;
    }

    /// The statistics.
    pub fn finish(self) -> TensorStats {
        let SpreadScan {
            mut s,
            others,
            range,
            ..
        } = self;
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
