//! `blocks_i8` and `blocks_i4`: the block loops around the accumulation that the target
//! kernels share.
//! Requantisation is [`crate::requant::requantise_validated`].
use super::DenseI8;
use crate::wire::layout::{self, BLOCK_ROWS, GROUP, GROUP_ELEMS};
use crate::wire::nibble::{self, GROUP_BYTES};

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
        *o = super::store_i8(
            p.table,
            crate::requant::requantise_validated(v, m, s as i8, p.zero_point, p.act_min, p.act_max),
        );
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

/// The block loop every `Nibble4x4` (int4) kernel shares (`FORMAT.md` §3.5): `groups(block,
/// full)` returns, for the block's full 4-input groups, `[S0, L0, S1, L1]`, where for the row
/// pair `p` (rows `2p`, `2p + 1`) `S_p = Σ u x` and `L_p = Σ (u mod 16) x` over its bytes `u`.
/// This adds the partial last group ([`super::int4::group_i4`]), turns the sums into the 4
/// rows' `Σ w x` ([`super::int4::rows`]), adds the bias, requantises and stores.
/// `correction` is [`super::portable::excess_correction`] of the inputs (`128 · Σ x`).
#[inline(always)]
pub(crate) fn blocks_i4(
    p: &DenseI8<'_>,
    input: &[u8],
    output: &mut [u8],
    correction: i32,
    groups: impl Fn(&[[u8; GROUP_BYTES]], &[[u8; GROUP]]) -> [i32; BLOCK_ROWS],
) {
    let n = p.inputs;
    let Some((_, data)) = nibble::split(p.weights, n, output.len()) else {
        return;
    };
    // 8 · Σ x: `correction` is 128 · Σ x, a multiple of 16, so the shift is exact.
    let excess = correction >> 4;
    let x = input.get(..n).unwrap_or(&[]);
    let (full, tail) = x.as_chunks::<GROUP>();
    let (bias, bias_rest) = p.bias.as_chunks::<16>();
    let (mult, mult_rest) = p.multiplier.as_chunks::<16>();
    let (shift, shift_rest) = p.shift.as_chunks::<4>();
    let mut params = bias.iter().zip(mult).zip(shift);
    let last = (padded(bias_rest), padded(mult_rest), padded(shift_rest));
    for (block, out) in
        super::pieces(data, nibble::padded(n) / 2 * BLOCK_ROWS).zip(output.chunks_mut(BLOCK_ROWS))
    {
        let g = block.as_chunks::<GROUP_BYTES>().0;
        let mut sums = groups(g, full);
        if let Some(last) = g.get(full.len()) {
            super::int4::group_i4(last, tail, &mut sums);
        }
        let q = params
            .next()
            .map_or((&last.0, &last.1, &last.2), |((b, m), s)| (b, m, s));
        let y = finish_i4(p, sums, excess, q);
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

/// [`finish`] for an int4 block's sums, kept small: once per block of 4 rows it costs a few
/// calls, and the requantisation inlined 4 times would cost flash in every firmware.
#[inline(never)]
fn finish_i4(
    p: &DenseI8<'_>,
    sums: [i32; BLOCK_ROWS],
    excess: i32,
    (bias, mult, shift): (&[u8; 16], &[u8; 16], &[u8; 4]),
) -> [u8; BLOCK_ROWS] {
    let mut y = [0u8; BLOCK_ROWS];
    let params = bias
        .as_chunks::<4>()
        .0
        .iter()
        .zip(mult.as_chunks::<4>().0)
        .zip(shift);
    for ((o, a), ((b, m), &s)) in y.iter_mut().zip(super::int4::rows(sums)).zip(params) {
        let acc = i32::from_le_bytes(*b).wrapping_add(a).wrapping_sub(excess);
        *o = requant_row(p, acc, i32::from_le_bytes(*m), s as i8);
    }
    y
}

/// One row's requantisation and store, out of line (see [`finish_i4`]).
#[inline(never)]
fn requant_row(p: &DenseI8<'_>, acc: i32, mult: i32, shift: i8) -> u8 {
    // `act_min ≤ act_max` always (`activation_range`), but out of line the optimiser cannot
    // see it, and `clamp` would keep its panic for `min > max`; `min` changes nothing here and
    // shows it (scripts/no-panic-check.sh).
    let lo = p.act_min.min(p.act_max);
    super::store_i8(
        p.table,
        crate::requant::requantise_validated(acc, mult, shift, p.zero_point, lo, p.act_max),
    )
}
