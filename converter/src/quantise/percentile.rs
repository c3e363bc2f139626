//! The percentile of a calibration tensor: definition 7 of Hyndman & Fan (1996), "Sample
//! quantiles in statistical packages", the default (`method="linear"`) of `numpy.percentile`.
//!
//! For `n` sorted values `v[0] ≤ … ≤ v[n-1]` and a percentile `p` in `[0, 100]`, the rank is
//! `h = (n - 1) · p / 100`, and the percentile is `v[⌊h⌋] + (h - ⌊h⌋) · (v[⌊h⌋ + 1] - v[⌊h⌋])`
//! (`v[n-1]` when `h ≥ n - 1`). It moves continuously with `p`, so a percentile below 100 pulls
//! the top of the range in below the largest value for any `n ≥ 2` — unlike a rank rounded to the
//! nearest whole index, which returned the largest value for every `p ≥ 99.99` and `n ≤ 5,000`.

/// The `p`-th percentile of `sorted` (ascending, finite), `p` in `[0, 100]`; 0 for no values.
///
/// Computed in f64 and rounded to f32 once, so a range whose ends are near `±f32::MAX` does not
/// overflow on the way (numpy interpolates an f32 array in f32; the results agree to within the
/// final rounding). The interpolation is numpy's `_lerp`: from the upper neighbour when the
/// fraction is at least one half, so the result is exact at both ends and never leaves
/// `[v[⌊h⌋], v[⌊h⌋ + 1]]`.
pub fn percentile(sorted: &[f32], p: f64) -> f32 {
    percentile_at(sorted.len(), p, &|i| sorted.get(i).copied())
}

/// [`percentile`] of `n` sorted values read through `at` (`at(i)` is `sorted[i]`), so that the
/// values can come from an exact selection ([`super::order_stats`]) instead of a sorted copy.
pub fn percentile_at(n: usize, p: f64, at: &dyn Fn(usize) -> Option<f32>) -> f32 {
    let (Some(first), Some(last)) = (at(0).filter(|_| n > 0), n.checked_sub(1).and_then(at)) else {
        return 0.0;
    };
    let h = (n - 1) as f64 * (p / 100.0);
    if h.is_nan() || h >= (n - 1) as f64 {
        return last;
    }
    if h <= 0.0 {
        return first;
    }
    let i = h.floor() as usize;
    let (Some(a), Some(b)) = (at(i), at(i + 1)) else {
        return last;
    };
    let (a, b, t) = (f64::from(a), f64::from(b), h - h.floor());
    let v = if t >= 0.5 {
        b - (b - a) * (1.0 - t)
    } else {
        a + (b - a) * t
    };
    v as f32
}

/// The ranks (indices into the sorted values) that [`percentile_at`] reads for `n` values.
pub fn percentile_ranks(n: usize, p: f64) -> Vec<usize> {
    let asked = std::cell::RefCell::new(Vec::new());
    percentile_at(n, p, &|i| {
        asked.borrow_mut().push(i);
        Some(0.0)
    });
    asked.into_inner()
}

/// The largest percentile (to two decimals) whose range leaves out the `outer` most extreme
/// values of `n` on each side: the rank `h = (n - 1) · p / 100` must not pass `n - 1 - outer`,
/// so that the interpolation never reaches one of them. `None` when no `p` above 50 does.
pub fn percentile_excluding(n: usize, outer: usize) -> Option<f64> {
    if n < 2 || outer == 0 || outer >= n {
        return None;
    }
    let exact = 100.0 * (n - 1 - outer) as f64 / (n - 1) as f64;
    let p = (exact * 100.0).floor() / 100.0;
    (p > 50.0).then_some(p)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn arange(n: usize) -> Vec<f32> {
        (0..n).map(|i| i as f32).collect()
    }

    #[test]
    fn numpy_linear_worked_values() {
        // Values from numpy 2.4.6, `np.percentile(np.arange(n, dtype=np.float32), p)`
        // (default method "linear"):
        //   n = 51, p = 99.99 -> 49.995; n = 51, p = 0.01 -> 0.005
        //   n = 765, p = 99.99 -> 763.9236; n = 765, p = 98 -> 748.72
        //   n = 1001, p = 99 -> 990.0; n = 2, p = 75 -> 0.75
        assert_eq!(percentile(&arange(51), 99.99), 49.995_f32);
        assert_eq!(percentile(&arange(51), 0.01), 0.005_f32);
        assert_eq!(percentile(&arange(765), 99.99), 763.9236_f32);
        assert_eq!(percentile(&arange(765), 98.0), 748.72_f32);
        assert_eq!(percentile(&arange(1001), 99.0), 990.0);
        assert_eq!(percentile(&arange(2), 75.0), 0.75);
        // By hand: rank (4 - 1) · 0.5 = 1.5, halfway between 10 and 30.
        assert_eq!(percentile(&[0.0, 10.0, 30.0, 100.0], 50.0), 20.0);
    }

    #[test]
    fn the_ranks_read_are_the_ones_that_matter() {
        // Rank 763.92 of 765 values reads indices 763 and 764 (with the ends).
        let r = percentile_ranks(765, 99.99);
        assert!(r.contains(&763) && r.contains(&764), "{r:?}");
        // Values other than those ranks do not change the result.
        let v = arange(765);
        let only = |i: usize| r.contains(&i).then(|| v[i]);
        assert_eq!(percentile_at(765, 99.99, &only), percentile(&v, 99.99));
    }

    #[test]
    fn ends_and_degenerate_inputs() {
        let v = [-2.0f32, 1.0, 5.0];
        assert_eq!(percentile(&v, 100.0), 5.0);
        assert_eq!(percentile(&v, 0.0), -2.0);
        assert_eq!(percentile(&[7.0], 99.0), 7.0);
        assert_eq!(percentile(&[], 99.0), 0.0);
        // Near ±f32::MAX the f64 interpolation stays finite (an f32 difference would be ∞).
        let wide = [-3e38f32, 3e38];
        assert!(percentile(&wide, 50.0).abs() < 1e32);
    }

    #[test]
    fn small_sets_are_clipped_below_their_largest_value() {
        // The old rank, round((n - 1) · p / 100), returned the largest value here; the linear
        // rank stays short of it: (51 - 1) · 0.9999 = 49.995.
        let mut v = arange(50);
        v.push(1e6);
        assert!(percentile(&v, 99.99) < 1e6);
    }

    #[test]
    fn percentile_that_leaves_out_the_outer_values() {
        // 765 values, 15 to leave out on each side: 100 · 749 / 764 = 98.036…, so 98.03; at
        // 98.03 the rank is 748.95 < 749, at 98.04 it would be 749.03 (reaching a left-out value).
        assert_eq!(percentile_excluding(765, 15), Some(98.03));
        let mut v = arange(750);
        v.extend([1e30f32; 15]);
        assert!(percentile(&v, 98.03) < 750.0);
        assert!(percentile(&v, 98.04) > 750.0);
        assert_eq!(percentile_excluding(10, 5), None);
        assert_eq!(percentile_excluding(10, 0), None);
        assert_eq!(percentile_excluding(1, 1), None);
    }
}
