//! Requantisation for the kernels: the same results as [`crate::requant::requantize`] for every
//! parameter validation lets through (multiplier in `[2^30, 2^31 - 1]`, shift in `[-31, 31]`),
//! in fewer instructions.
//!
//! - `SaturatingRoundingDoublingHighMul(x, m)` is `round(x·m / 2^31)` with ties upward, which
//!   for both signs equals `floor((x·m + 2^30) / 2^31)` (for `x·m < 0` the nudge `1 - 2^30` and
//!   the truncation toward zero add up to the same floor); its one saturating case needs
//!   `m = i32::MIN`, which validation excludes.
//! - `RoundingDivideByPOT(v, e)`, ties away from zero, is `floor((v + 2^(e-1) - [v < 0]) / 2^e)`
//!   for `e ≥ 1`, computed in 64 bits so that it cannot overflow.
//!
//! `kernels_prop.rs` checks the equality against [`crate::requant::requantize`].

/// [`crate::requant::requantize`] for a validated multiplier (`≥ 2^30`).
#[inline(always)]
pub fn requantize(acc: i32, multiplier: i32, shift: i8, zero_point: i8, lo: i8, hi: i8) -> i8 {
    let x = if shift < 0 {
        let wide = i64::from(acc) << u32::from(shift.unsigned_abs()).min(31);
        wide.clamp(i64::from(i32::MIN), i64::from(i32::MAX))
    } else {
        i64::from(acc)
    };
    let high = (x * i64::from(multiplier) + (1 << 30)) >> 31;
    let e = u32::from(shift.max(0) as u8).min(31);
    let scaled = if e == 0 {
        high
    } else {
        (high + (1i64 << (e - 1)) - i64::from(high < 0)) >> e
    };
    let y = scaled.clamp(-256, 256) as i32 + i32::from(zero_point);
    y.clamp(i32::from(lo), i32::from(hi)) as i8
}
