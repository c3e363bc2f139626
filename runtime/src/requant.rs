//! Integer-only requantisation of an int32 accumulator to int8.
//!
//! The real multiplier `M = s_in * s_w / s_out` of a layer is stored as a 32-bit fixed-point
//! `multiplier` in `[2^30, 2^31 - 1]` and a right `shift`, `M = multiplier * 2^-31 * 2^-shift`.
//! The arithmetic is the one of Jacob et al., 2018, "Quantization and Training of Neural
//! Networks for Efficient Integer-Arithmetic-Only Inference" (CVPR), §2.2, as defined by the
//! gemmlowp reference functions `SaturatingRoundingDoublingHighMul` and `RoundingDivideByPOT`:
//! both round to nearest; the first breaks ties upward (its nudge makes -1.5 → -1 and 1.5 → 2),
//! the second breaks ties away from zero.

/// `round(a * b / 2^31)` with ties toward +∞, saturating the one overflowing case
/// (`a = b = i32::MIN`).
#[inline(always)]
pub fn saturating_rounding_doubling_high_mul(a: i32, b: i32) -> i32 {
    if a == i32::MIN && b == i32::MIN {
        return i32::MAX;
    }
    let ab = i64::from(a) * i64::from(b);
    let nudge: i64 = if ab >= 0 { 1 << 30 } else { 1 - (1 << 30) };
    // |ab + nudge| < 2^62, so the quotient fits in i32 for every input but the one excluded.
    ((ab + nudge) / (1i64 << 31)) as i32
}

/// `x / 2^exponent` rounded to nearest, ties away from zero. `exponent` in `0..=31`.
#[inline(always)]
pub fn rounding_divide_by_pot(x: i32, exponent: u32) -> i32 {
    let exponent = exponent.min(31);
    let mask: i32 = ((1i64 << exponent) - 1) as i32;
    let remainder = x & mask;
    let threshold = (mask >> 1) + i32::from(x < 0);
    (x >> exponent) + i32::from(remainder > threshold)
}

/// Scales `acc` by `multiplier * 2^-31 * 2^-shift`, adds `zero_point` and clamps to
/// `[act_min, act_max]`. A negative `shift` is a saturating left shift before the multiply.
///
/// ReLU is fused by passing `act_min = zero_point`.
#[inline(always)]
pub fn requantise_reference(
    acc: i32,
    multiplier: i32,
    shift: i8,
    zero_point: i8,
    act_min: i8,
    act_max: i8,
) -> i8 {
    let (x, right) = if shift < 0 {
        let left = u32::from(shift.unsigned_abs()).min(31);
        let wide = i64::from(acc) << left;
        (
            wide.clamp(i64::from(i32::MIN), i64::from(i32::MAX)) as i32,
            0,
        )
    } else {
        (acc, u32::from(shift.unsigned_abs()))
    };
    let scaled =
        rounding_divide_by_pot(saturating_rounding_doubling_high_mul(x, multiplier), right);
    let y = i64::from(scaled) + i64::from(zero_point);
    y.clamp(i64::from(act_min), i64::from(act_max)) as i8
}

/// [`requantise_reference`] for a validated multiplier (`≥ 2^30`), in fewer instructions: the
/// one the kernels use.
///
/// The same result as [`requantise_reference`] for every parameter validation lets through
/// (multiplier in `[2^30, 2^31 - 1]`, shift in `[-31, 31]`):
///
/// - `SaturatingRoundingDoublingHighMul(x, m)` is `round(x·m / 2^31)` with ties upward, which
///   for both signs equals `floor((x·m + 2^30) / 2^31)` (for `x·m < 0` the nudge `1 - 2^30` and
///   the truncation toward zero add up to the same floor); its one saturating case needs
///   `m = i32::MIN`, which validation excludes.
/// - `RoundingDivideByPOT(v, e)`, ties away from zero, is gemmlowp's mask-and-threshold form
///   (as [`rounding_divide_by_pot`]), in 32 bits, without a branch for `e = 0`.
///
/// `runtime/tests/kernels_prop.rs` checks the equality.
#[inline(always)]
pub fn requantise_validated(
    acc: i32,
    multiplier: i32,
    shift: i8,
    zero_point: i8,
    lo: i8,
    hi: i8,
) -> i8 {
    let x = if shift < 0 {
        let wide = i64::from(acc) << u32::from(shift.unsigned_abs()).min(31);
        wide.clamp(i64::from(i32::MIN), i64::from(i32::MAX))
    } else {
        i64::from(acc)
    };
    // |x · multiplier| ≤ 2^62, so the rounded high half fits in i32 (see above).
    let high = ((x * i64::from(multiplier) + (1 << 30)) >> 31) as i32;
    // RoundingDivideByPOT in its own 32-bit form: `e = 0` gives mask 0 and no rounding.
    let e = u32::from(shift.max(0) as u8).min(31);
    let mask = ((1u32 << e) - 1) as i32;
    let threshold = (mask >> 1) + i32::from(high < 0);
    let scaled = (high >> e) + i32::from(high & mask > threshold);
    let y = scaled.saturating_add(i32::from(zero_point));
    y.clamp(i32::from(lo), i32::from(hi)) as i8
}

/// The activation clamp for an int8 output with `zero_point`: ReLU clamps at the zero point.
#[inline]
pub fn activation_range(activation: crate::Activation, zero_point: i8) -> (i8, i8) {
    match activation {
        crate::Activation::Relu => (zero_point, i8::MAX),
        // A pointwise table takes every requantised value.
        crate::Activation::Linear | crate::Activation::Pointwise => (i8::MIN, i8::MAX),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HALF: i32 = 1 << 30; // multiplier for M = 0.5 (with shift 0)

    #[test]
    fn doubling_high_mul_hand_worked() {
        // 3 * 2^30 / 2^31 = 1.5 → 2; -1.5 → -1 (the negative nudge is 1 - 2^30: ties go up).
        assert_eq!(saturating_rounding_doubling_high_mul(3, HALF), 2);
        assert_eq!(saturating_rounding_doubling_high_mul(-3, HALF), -1);
        // 5 * 0.5 = 2.5 → 3; -2.5 → -2; -2.75 → -3.
        assert_eq!(saturating_rounding_doubling_high_mul(5, HALF), 3);
        assert_eq!(saturating_rounding_doubling_high_mul(-5, HALF), -2);
        assert_eq!(saturating_rounding_doubling_high_mul(-11, HALF / 2), -3);
        // Just below a tie rounds down.
        assert_eq!(saturating_rounding_doubling_high_mul(3, HALF - 1), 1);
        // The single overflow case saturates.
        assert_eq!(
            saturating_rounding_doubling_high_mul(i32::MIN, i32::MIN),
            i32::MAX
        );
        assert_eq!(
            saturating_rounding_doubling_high_mul(i32::MAX, i32::MAX),
            i32::MAX - 1
        );
    }

    #[test]
    fn divide_by_power_of_two_rounds_half_away_from_zero() {
        assert_eq!(rounding_divide_by_pot(5, 1), 3); // 2.5 → 3
        assert_eq!(rounding_divide_by_pot(-5, 1), -3); // -2.5 → -3
        assert_eq!(rounding_divide_by_pot(6, 2), 2); // 1.5 → 2
        assert_eq!(rounding_divide_by_pot(-6, 2), -2); // -1.5 → -2
        assert_eq!(rounding_divide_by_pot(5, 2), 1); // 1.25 → 1
        assert_eq!(rounding_divide_by_pot(-7, 2), -2); // -1.75 → -2
        assert_eq!(rounding_divide_by_pot(7, 0), 7);
        assert_eq!(rounding_divide_by_pot(i32::MIN, 31), -1);
        assert_eq!(rounding_divide_by_pot(i32::MAX, 31), 1);
    }

    #[test]
    fn requantise_reference_rounds_saturates_and_clamps() {
        // M = 0.5 · 2^-1 = 0.25: 10 · 0.25 = 2.5 → 3 after the two roundings (10·0.5 = 5, 5/2 → 3).
        assert_eq!(requantise_reference(10, HALF, 1, 0, -128, 127), 3);
        assert_eq!(requantise_reference(-10, HALF, 1, 0, -128, 127), -3);
        // Saturation at both ends.
        assert_eq!(requantise_reference(1_000_000, HALF, 0, 0, -128, 127), 127);
        assert_eq!(
            requantise_reference(-1_000_000, HALF, 0, 0, -128, 127),
            -128
        );
        // Zero point added before clamping: 100 · 0.5 + 100 = 150 → 127.
        assert_eq!(requantise_reference(100, HALF, 0, 100, -128, 127), 127);
        // ReLU with a non-zero zero point clamps at the zero point, not at 0.
        let (lo, hi) = activation_range(crate::Activation::Relu, -20);
        assert_eq!(requantise_reference(-50, HALF, 0, -20, lo, hi), -20);
        assert_eq!(requantise_reference(50, HALF, 0, -20, lo, hi), 5);
        // Negative shift: a saturating left shift (M = 0.5 · 2^3 = 4).
        assert_eq!(requantise_reference(7, HALF, -3, 0, -128, 127), 28);
        assert_eq!(requantise_reference(i32::MAX, HALF, -31, 0, -128, 127), 127);
        assert_eq!(
            requantise_reference(i32::MIN, HALF, -31, 0, -128, 127),
            -128
        );
    }
}
