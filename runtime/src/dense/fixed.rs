//! Requantisation for the kernels: the same results as [`crate::requant::requantize`] for every
//! parameter validation lets through (multiplier in `[2^30, 2^31 - 1]`, shift in `[-31, 31]`),
//! in fewer instructions.
//!
//! - `SaturatingRoundingDoublingHighMul(x, m)` is `round(x·m / 2^31)` with ties upward, which
//!   for both signs equals `floor((x·m + 2^30) / 2^31)` (for `x·m < 0` the nudge `1 - 2^30` and
//!   the truncation toward zero add up to the same floor); its one saturating case needs
//!   `m = i32::MIN`, which validation excludes.
//! - `RoundingDivideByPOT(v, e)`, ties away from zero, is gemmlowp's mask-and-threshold form
//!   (as [`crate::requant::rounding_divide_by_pot`]), in 32 bits, without a branch for `e = 0`.
//!
//! `kernels_prop.rs` checks the equality against [`crate::requant::requantize`].
//!
//! `blocks_i8` is the block loop around the accumulation that the target kernels share.
use super::layout::{self, BLOCK_ROWS, GROUP, GROUP_ELEMS};
use super::DenseI8;

/// [`crate::requant::requantize`] for a validated multiplier (`≥ 2^30`).
#[inline(always)]
pub fn requantize(acc: i32, multiplier: i32, shift: i8, zero_point: i8, lo: i8, hi: i8) -> i8 {
    let x = if shift < 0 {
        let wide = i64::from(acc) << u32::from(shift.unsigned_abs()).min(31);
        wide.clamp(i64::from(i32::MIN), i64::from(i32::MAX))
    } else {
        i64::from(acc)
    };
    // |x · multiplier| ≤ 2^62, so the rounded high half fits in i32 (see the module docs).
    let high = ((x * i64::from(multiplier) + (1 << 30)) >> 31) as i32;
    // RoundingDivideByPOT in its own 32-bit form: `e = 0` gives mask 0 and no rounding.
    let e = u32::from(shift.max(0) as u8).min(31);
    let mask = ((1u32 << e) - 1) as i32;
    let threshold = (mask >> 1) + i32::from(high < 0);
    let scaled = (high >> e) + i32::from(high & mask > threshold);
    let y = scaled.saturating_add(i32::from(zero_point));
    y.clamp(i32::from(lo), i32::from(hi)) as i8
}

/// The first `N` bytes of a short slice, zero-padded (the parameters of the last block of a
/// layer whose width is not a multiple of 4).
#[inline(never)]
#[cold]
fn padded<const N: usize>(s: &[u8]) -> [u8; N] {
    let mut a = [0u8; N];
    for (d, v) in a.iter_mut().zip(s) {
        *d = *v;
    }
    a
}

/// Requantises one block's accumulators (biases not yet added, `correction` still to be
/// subtracted) with the 4 rows' little-endian biases, multipliers and shifts.
#[inline(always)]
fn finish(
    p: &DenseI8<'_>,
    acc: [i32; BLOCK_ROWS],
    correction: i32,
    (bias, mult, shift): (&[u8; 16], &[u8; 16], &[u8; 4]),
) -> [u8; BLOCK_ROWS] {
    let mut y = [0u8; BLOCK_ROWS];
    let params = bias
        .as_chunks::<4>()
        .0
        .iter()
        .zip(mult.as_chunks::<4>().0)
        .zip(shift);
    for ((o, a), ((b, m), &s)) in y.iter_mut().zip(acc).zip(params) {
        let v = i32::from_le_bytes(*b)
            .wrapping_add(a)
            .wrapping_sub(correction);
        let m = i32::from_le_bytes(*m);
        *o = requantize(v, m, s as i8, p.zero_point, p.act_min, p.act_max) as u8;
    }
    y
}

/// The block loop every `Blocked4x4` int8 kernel shares: `groups(block, full)` returns the 4
/// accumulators of the block's full 4-input groups (excess-128 weights times the inputs); this
/// adds the partial last group, the bias and the `128 · Σ x` `correction`, requantises and
/// stores. `correction` is [`super::portable::excess_correction`] of the inputs.
#[inline(always)]
pub(crate) fn blocks_i8(
    p: &DenseI8<'_>,
    input: &[u8],
    output: &mut [u8],
    correction: i32,
    groups: impl Fn(&[[u8; GROUP_ELEMS]], &[[u8; GROUP]]) -> [i32; BLOCK_ROWS],
) {
    let n = p.inputs;
    let Some((_, data)) = layout::split(p.weights, n, output.len(), 1) else {
        return;
    };
    let x = input.get(..n).unwrap_or(&[]);
    let (full, tail) = x.as_chunks::<GROUP>();
    let (bias, bias_rest) = p.bias.as_chunks::<16>();
    let (mult, mult_rest) = p.multiplier.as_chunks::<16>();
    let (shift, shift_rest) = p.shift.as_chunks::<4>();
    let mut params = bias.iter().zip(mult).zip(shift);
    // The parameters of a last block of fewer than 4 rows, zero-padded (once per layer).
    let last = (padded(bias_rest), padded(mult_rest), padded(shift_rest));
    for (block, out) in
        super::pieces(data, layout::padded(n) * BLOCK_ROWS).zip(output.chunks_mut(BLOCK_ROWS))
    {
        let g = block.as_chunks::<GROUP_ELEMS>().0;
        let mut acc = groups(g, full);
        if let Some(last) = g.get(full.len()) {
            super::portable::group_i8(last, tail, &mut acc);
        }
        // Whole 4-row parameter chunks, except in a last block of fewer than 4 rows.
        let q = params
            .next()
            .map_or((&last.0, &last.1, &last.2), |((b, m), s)| (b, m, s));
        let y = finish(p, acc, correction, q);
        match out.first_chunk_mut::<BLOCK_ROWS>() {
            Some(o) => *o = y,
            None => {
                for (d, v) in out.iter_mut().zip(y) {
                    *d = v;
                }
            }
        }
    }
}
