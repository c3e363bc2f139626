//! The window features of the vibration example, exactly as `examples/vibration/FEATURES.md`
//! defines them, for one window of 3 axes × 128 `int16` samples.
//!
//! This crate is the *single* implementation used both by the firmware (on Cortex-M0 and
//! Cortex-M4F) and by the host test `tests/tests/firmware_vectors.rs`, so the feature values —
//! and therefore the model inputs — are produced by the same code everywhere. It is a crate of
//! its own (rather than a module pulled in with `#[path]`) so that both workspaces depend on it
//! by path, with its own unit tests, and neither has to know the other's module layout.
//!
//! Arithmetic: every sum is accumulated in integers, so it is exact, and each feature is
//! rounded to `f32` once at the end (`rms` twice: the `u64` → `f32` conversion and the square
//! root). This is the exact-sum variant that `FEATURES.md` recommends; integer and IEEE-754
//! single-precision operations give the same bits on every target, with or without an FPU.
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing
    )
)]

/// Samples per axis in one window.
pub const WINDOW: usize = 128;

/// Axes per window (x, y, z).
pub const AXES: usize = 3;

/// Features per axis: mean, rms, p2p, mad1, zc.
pub const PER_AXIS: usize = 5;

/// Features per window.
pub const FEATURES: usize = AXES * PER_AXIS;

/// One window: `window[axis][sample]`, axes in the order x, y, z, samples in time order.
pub type Window = [[i16; WINDOW]; AXES];

/// Feature names in output order (`x_mean, x_rms, ..., z_zc`).
pub const FEATURE_NAMES: [&str; FEATURES] = [
    "x_mean", "x_rms", "x_p2p", "x_mad1", "x_zc", "y_mean", "y_rms", "y_p2p", "y_mad1", "y_zc",
    "z_mean", "z_rms", "z_p2p", "z_mad1", "z_zc",
];

/// The five features of one axis: `[mean, rms, p2p, mad1, zc]`.
///
/// * `mean = sum(s) / 128` — the `i32` sum is below `2^22` in magnitude, so the `f32` value is
///   exact.
/// * `rms = sqrt(sum((s - mean)^2) / 128)`. With `d = 128·s - sum` (an integer below `2^24`),
///   `(s - mean)^2 = d^2 / 2^14`, so `rms = sqrt(sum(d^2) / 2^21)`; `sum(d^2) < 2^55` is
///   accumulated exactly in `u64`.
/// * `p2p = max(s) - min(s)`, exact.
/// * `mad1 = sum(|s[i] - s[i-1]|, i = 1..127) / 127`: exact integer sum, one rounded division.
/// * `zc`: count of `i` in `1..127` where the deviations `d[i]`, `d[i-1]` have strictly
///   opposite signs (a zero deviation never counts) — the sign of `d` is the sign of
///   `s - mean`, so this is `(s[i] - mean)(s[i-1] - mean) < 0` evaluated exactly.
pub fn axis_features(s: &[i16; WINDOW]) -> [f32; PER_AXIS] {
    let sum: i32 = s.iter().map(|&v| i32::from(v)).sum();
    let n = WINDOW as i32;
    let dev = |v: i16| i64::from(i32::from(v) * n - sum);

    let mut sum_sq: u64 = 0;
    let mut lo = i16::MAX;
    let mut hi = i16::MIN;
    let mut abs_diff: u32 = 0;
    let mut crossings: u32 = 0;
    let mut prev: Option<i16> = None;
    for &v in s {
        let d = dev(v);
        sum_sq += d.unsigned_abs() * d.unsigned_abs();
        lo = lo.min(v);
        hi = hi.max(v);
        if let Some(p) = prev {
            abs_diff += (i32::from(v) - i32::from(p)).unsigned_abs();
            let dp = dev(p);
            if (d < 0 && dp > 0) || (d > 0 && dp < 0) {
                crossings += 1;
            }
        }
        prev = Some(v);
    }

    let mean = sum as f32 / WINDOW as f32;
    // 2^-21 is a power of two, so the scaling is exact; the conversion rounds once.
    let rms = libm::sqrtf(sum_sq as f32 * (1.0 / 2_097_152.0));
    let p2p = (i32::from(hi) - i32::from(lo)) as f32;
    let mad1 = abs_diff as f32 / (WINDOW - 1) as f32;
    [mean, rms, p2p, mad1, crossings as f32]
}

/// The 15 features of one window, in the order of [`FEATURE_NAMES`].
pub fn window_features(w: &Window) -> [f32; FEATURES] {
    let mut out = [0f32; FEATURES];
    for (chunk, axis) in out.chunks_exact_mut(PER_AXIS).zip(w) {
        chunk.copy_from_slice(&axis_features(axis));
    }
    out
}

/// Decodes a window from `3 · 128` little-endian `i16` (axis-major, as `numpy` stores an
/// `int16 [3, 128]` array in C order). Returns `None` if `bytes` is not exactly that long.
pub fn window_from_le_bytes(bytes: &[u8]) -> Option<Window> {
    if bytes.len() != AXES * WINDOW * 2 {
        return None;
    }
    let mut w = [[0i16; WINDOW]; AXES];
    let samples = w.iter_mut().flat_map(|axis| axis.iter_mut());
    for (dst, b) in samples.zip(bytes.chunks_exact(2)) {
        if let [lo, hi] = b {
            *dst = i16::from_le_bytes([*lo, *hi]);
        }
    }
    Some(w)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hand_worked_axis() {
        // s = [0, 2, 0, 2, ...]: mean 1, every deviation ±1 → rms 1, p2p 2, mad1 2,
        // 127 sign changes.
        let mut s = [0i16; WINDOW];
        for (i, v) in s.iter_mut().enumerate() {
            *v = if i % 2 == 1 { 2 } else { 0 };
        }
        assert_eq!(axis_features(&s), [1.0, 1.0, 2.0, 2.0, 127.0]);
    }

    #[test]
    fn zero_deviation_never_counts_as_a_crossing() {
        // s = [-1, 0, 1, 0, -1, 0, 1, 0, ...]: mean 0; zeros sit between every sign change, so
        // no adjacent pair has strictly opposite signs.
        let mut s = [0i16; WINDOW];
        for (i, v) in s.iter_mut().enumerate() {
            *v = [-1, 0, 1, 0][i % 4];
        }
        let f = axis_features(&s);
        assert_eq!(f[4], 0.0);
        assert_eq!(f[0], 0.0);
        // rms = sqrt(64 / 128), mad1 = 127 / 127.
        assert_eq!(f[1], libm::sqrtf(0.5));
        assert_eq!(f[3], 1.0);
    }

    #[test]
    fn extreme_values_stay_exact() {
        // Half the samples at i16::MIN, half at i16::MAX: mean -0.5, deviations ±32767.5,
        // rms 32767.5 (exactly representable), p2p 65535, one crossing.
        let mut s = [i16::MAX; WINDOW];
        for v in s.iter_mut().take(WINDOW / 2) {
            *v = i16::MIN;
        }
        assert_eq!(
            axis_features(&s),
            [-0.5, 32767.5, 65535.0, 65535.0 / 127.0, 1.0]
        );
    }

    #[test]
    fn constant_axis_has_zero_spread() {
        let s = [8192i16; WINDOW];
        assert_eq!(axis_features(&s), [8192.0, 0.0, 0.0, 0.0, 0.0]);
    }

    #[test]
    fn window_order_and_decoding() {
        let mut bytes = [0u8; AXES * WINDOW * 2];
        // Axis y (index 1), sample 0 = -2 (0xFFFE little-endian).
        bytes[WINDOW * 2] = 0xFE;
        bytes[WINDOW * 2 + 1] = 0xFF;
        let w = window_from_le_bytes(&bytes).unwrap();
        assert_eq!(w[1][0], -2);
        assert_eq!(w[0][0], 0);
        let f = window_features(&w);
        assert_eq!(f[5], -2.0 / 128.0); // y_mean
        assert_eq!(f[7], 2.0); // y_p2p
        assert_eq!(f[0], 0.0); // x_mean
        assert!(window_from_le_bytes(&bytes[1..]).is_none());
    }
}
