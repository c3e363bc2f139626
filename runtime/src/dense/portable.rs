//! The portable kernels: plain Rust over byte slices, no alignment assumptions, for every
//! layout. They are the reference the target kernels must match bit for bit.
//!
//! Validation guarantees the slice lengths agree with the shapes; should they not, the zipped
//! iterators simply stop early — they never index out of bounds.
use super::{DenseF32, DenseI8};
use crate::le;
use crate::requant::{requantise_reference, requantise_validated};
use crate::wire::layout::{self, BLOCK_ROWS, GROUP, GROUP_ELEMS};

/// Runs an int8 dense layer with [`crate::wire::format::WeightLayout::OutputMajor`] weights: `input` holds `inputs` int8 values, `output` receives one per row.
///
/// Accumulates in i32; [`crate::Model::parse`] proved that no int8 input can overflow it.
pub fn dense_i8(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    // `chunks`, by `&mut`, rather than `chunks_exact`: neither it nor the zip computes the
    // number of rows, a division that would link a software divide on a Cortex-M0 (see
    // `super::pieces`). Validation made every row exactly `inputs` long.
    let mut rows = p.weights.chunks(p.inputs.max(1));
    let params = le::i32s(p.bias).zip(le::i32s(p.multiplier)).zip(p.shift);
    for ((row, out), ((bias, mult), &shift)) in (&mut rows).zip(output.iter_mut()).zip(params) {
        let mut acc = bias;
        for (&w, &x) in row.iter().zip(input) {
            acc += i32::from(w as i8) * i32::from(x as i8);
        }
        *out = super::store_i8(
            p.table,
            requantise_reference(acc, mult, shift as i8, p.zero_point, p.act_min, p.act_max),
        );
    }
}

/// Runs an f32 dense layer with output-major weights over little-endian f32 bytes; `p.relu`
/// clamps negatives to 0.
pub fn dense_f32(p: &DenseF32<'_>, input: &[u8], output: &mut [u8]) {
    // The last `max(4)` lets the optimiser see the chunk size is non-zero, which removes
    // `chunks_exact`'s panic path (scripts/no-panic-check.sh).
    let rows = p
        .weights
        .chunks_exact(p.inputs.max(1).saturating_mul(4).max(4));
    let outs = output.as_chunks_mut::<4>().0.iter_mut();
    for ((row, out), b) in rows.zip(outs).zip(le::f32s(p.bias)) {
        let mut acc = 0.0f32;
        for (w, x) in le::f32s(row).zip(le::f32s(input)) {
            acc += w * x;
        }
        acc += b;
        if p.relu && acc < 0.0 {
            acc = 0.0;
        }
        *out = acc.to_le_bytes();
    }
}

/// `128 · Σ x` over the first `n` inputs: what excess-128 weights add to each accumulator.
pub fn excess_correction(input: &[u8], n: usize) -> i32 {
    let sum: i32 = input.iter().take(n).map(|&x| i32::from(x as i8)).sum();
    sum.wrapping_mul(128)
}

/// The layer's per-row parameters, row by row: bias, multiplier, shift.
pub(crate) fn row_params<'a>(p: &DenseI8<'a>) -> impl Iterator<Item = (i32, i32, i8)> + 'a {
    le::i32s(p.bias)
        .zip(le::i32s(p.multiplier))
        .zip(p.shift.iter())
        .map(|((b, m), &s)| (b, m, s as i8))
}

/// Requantises one block's accumulators (biases not yet added) into `out` (up to 4 rows).
#[inline(always)]
pub(crate) fn finish_block(
    p: &DenseI8<'_>,
    acc: [i32; BLOCK_ROWS],
    correction: i32,
    params: &mut impl Iterator<Item = (i32, i32, i8)>,
    out: &mut [u8],
) {
    for (o, (a, (bias, mult, shift))) in out.iter_mut().zip(acc.into_iter().zip(params)) {
        let acc = bias.wrapping_add(a).wrapping_sub(correction);
        *o = super::store_i8(
            p.table,
            requantise_validated(acc, mult, shift, p.zero_point, p.act_min, p.act_max),
        );
    }
}

/// Accumulates one group of one block (4 rows, `x.len()` ≤ 4 inputs) into `acc`.
#[inline(always)]
pub(crate) fn group_i8(group: &[u8; GROUP_ELEMS], x: &[u8], acc: &mut [i32; BLOCK_ROWS]) {
    let rows = group.as_chunks::<GROUP>().0;
    for (a, row) in acc.iter_mut().zip(rows) {
        for (&w, &x) in row.iter().zip(x) {
            *a = a.wrapping_add(i32::from(w) * i32::from(x as i8));
        }
    }
}

/// Accumulates a whole block (4 rows) lane-wise: lanes `2r` and `2r + 1` sum row `r`'s products
/// of inputs 0–1 and 2–3 of every group. Integer sums are exact in any order, so this shape —
/// fixed-size arrays, pairs of products, no dependency between lanes — lets compilers for wide
/// hosts vectorise it (on x86-64 as `pmaddwd`; the `kinglet vet` comparison runs millions of
/// rows through here).
#[inline(always)]
fn block_lanes_i8(block: &[u8], x: &[u8]) -> [i32; BLOCK_ROWS] {
    let mut lanes = [0i32; 2 * BLOCK_ROWS];
    let (groups, _) = block.as_chunks::<GROUP_ELEMS>();
    let (xs, tail) = x.as_chunks::<GROUP>();
    for (g, xg) in groups.iter().zip(xs) {
        let [x0, x1, x2, x3] = xg.map(|v| i32::from(v as i8));
        let pairs = lanes.as_chunks_mut::<2>().0.iter_mut();
        for ([lo, hi], w4) in pairs.zip(g.as_chunks::<GROUP>().0) {
            let [w0, w1, w2, w3] = w4.map(i32::from);
            *lo = lo.wrapping_add(w0 * x0 + w1 * x1);
            *hi = hi.wrapping_add(w2 * x2 + w3 * x3);
        }
    }
    let mut acc = [0i32; BLOCK_ROWS];
    if let (Some(g), false) = (groups.get(xs.len()), tail.is_empty()) {
        group_i8(g, tail, &mut acc);
    }
    for (a, [lo, hi]) in acc.iter_mut().zip(lanes.as_chunks::<2>().0) {
        *a = a.wrapping_add(*lo).wrapping_add(*hi);
    }
    acc
}

/// Runs an int8 dense layer with [`crate::wire::format::WeightLayout::Blocked4x4`] weights (the whole
/// field, alignment bytes included); `output.len()` is the layer's output width.
pub fn dense_i8_blocked_portable(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let n = p.inputs;
    let Some((_, data)) = layout::split(p.weights, n, output.len(), 1) else {
        return;
    };
    let x = input.get(..n).unwrap_or(&[]);
    let correction = excess_correction(input, n);
    let mut params = row_params(p);
    let block_len = layout::padded(n) * BLOCK_ROWS;
    for (block, out) in data
        .chunks_exact(block_len.max(1))
        .zip(output.chunks_mut(BLOCK_ROWS))
    {
        let acc = block_lanes_i8(block, x);
        finish_block(p, acc, correction, &mut params, out);
    }
}

/// Adds one group (4 inputs) of `B` consecutive blocks into `acc` (4 rows per block). Each row
/// still adds its products in input order — only independent rows are interleaved, which gives
/// a wide host more independent additions in flight without changing any result bit.
#[inline(always)]
fn groups_f32<const B: usize>(groups: [&[u8]; B], x: &[u8], acc: &mut [[f32; BLOCK_ROWS]; B]) {
    let xv: [f32; GROUP] = core::array::from_fn(|i| le::f32_at(x, i).unwrap_or(0.0));
    let live = x.len() / 4;
    for (i, &xi) in xv.iter().enumerate().take(live) {
        for (a, g) in acc.iter_mut().zip(groups) {
            for (r, ar) in a.iter_mut().enumerate() {
                *ar += le::f32_at(g, r * GROUP + i).unwrap_or(0.0) * xi;
            }
        }
    }
}

/// Runs an f32 dense layer with [`crate::wire::format::WeightLayout::Blocked4x4`] weights; each row
/// adds its products in input order from `+0.0`, then the bias, exactly as [`dense_f32`].
pub fn dense_f32_blocked_portable(p: &DenseF32<'_>, input: &[u8], output: &mut [u8]) {
    let outs = output.as_chunks_mut::<4>().0;
    let Some(super::blocked_f32::Cut { data, x, block_len }) =
        super::blocked_f32::cut(p, outs.len(), input)
    else {
        return;
    };
    let block_len = block_len.max(4);
    let group_len = GROUP_ELEMS * 4;
    let mut biases = le::f32s(p.bias);
    let mut finish = |acc: &[f32; BLOCK_ROWS], out: &mut [[u8; 4]]| {
        super::blocked_f32::finish(acc, &mut biases, p.relu, out)
    };
    // Two blocks (8 rows) per pass, then a last single block if the count is odd.
    // Saturating and `max`: the optimiser then sees a non-zero chunk and a cut inside it, so
    // neither `chunks_exact` nor the split keeps a panic path (scripts/no-panic-check.sh).
    let pairs = data.chunks_exact(block_len.saturating_mul(2).max(8));
    let single = pairs.remainder();
    let mut out_pairs = outs.chunks_mut(2 * BLOCK_ROWS);
    for pair in pairs {
        let Some((b0, b1)) = pair.split_at_checked(block_len) else {
            continue;
        };
        let mut acc = [[0.0f32; BLOCK_ROWS]; 2];
        let gs = b0.chunks_exact(group_len).zip(b1.chunks_exact(group_len));
        for ((g0, g1), xg) in gs.zip(x.chunks(GROUP * 4)) {
            groups_f32([g0, g1], xg, &mut acc);
        }
        if let Some(out) = out_pairs.next() {
            let (o0, o1) = out.split_at_mut(BLOCK_ROWS.min(out.len()));
            finish(&acc[0], o0);
            finish(&acc[1], o1);
        }
    }
    if let (Some(out), false) = (out_pairs.next(), single.is_empty()) {
        let mut acc = [[0.0f32; BLOCK_ROWS]; 1];
        for (g, xg) in single.chunks_exact(group_len).zip(x.chunks(GROUP * 4)) {
            groups_f32([g], xg, &mut acc);
        }
        finish(&acc[0], out);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use kinglet_builder::le::{f32s as bytes_f32, i32s as bytes_i32};

    #[test]
    fn int8_dense_hand_worked() {
        // W = [[1, -2, 3], [-128, 127, 0]], x = [10, 20, -30], b = [5, -7].
        // acc0 = 5 + 10 - 40 - 90 = -115; acc1 = -7 - 1280 + 2540 = 1253.
        // M = 0.5 · 2^-2 = 1/8: -115/8 = -14.375 → -14; 1253/8 = 156.6 → 157 → saturates at 127.
        let w: Vec<u8> = [1i8, -2, 3, -128, 127, 0]
            .iter()
            .map(|&v| v as u8)
            .collect();
        let x: Vec<u8> = [10i8, 20, -30].iter().map(|&v| v as u8).collect();
        let p = DenseI8 {
            inputs: 3,
            weights: &w,
            bias: &bytes_i32(&[5, -7]),
            multiplier: &bytes_i32(&[1 << 30, 1 << 30]),
            shift: &[2, 2],
            zero_point: 0,
            act_min: -128,
            act_max: 127,
            table: None,
        };
        let mut out = [0u8; 2];
        dense_i8(&p, &x, &mut out);
        assert_eq!(out.map(|v| v as i8), [-14, 127]);
        // With a fused ReLU at zero point 3: -14 + 3 → clamped to 3.
        let relu = DenseI8 {
            zero_point: 3,
            act_min: 3,
            ..p
        };
        dense_i8(&relu, &x, &mut out);
        assert_eq!(out.map(|v| v as i8), [3, 127]);
    }

    #[test]
    fn f32_dense_hand_worked() {
        let w = bytes_f32(&[1.0, 2.0, -1.0, 0.5]);
        let b = bytes_f32(&[0.5, -10.0]);
        let x = bytes_f32(&[3.0, 4.0]);
        let mut out = [0u8; 8];
        let linear = DenseF32 {
            inputs: 2,
            weights: &w,
            bias: &b,
            relu: false,
        };
        dense_f32(&linear, &x, &mut out);
        assert_eq!(le::f32_at(&out, 0), Some(11.5));
        assert_eq!(le::f32_at(&out, 1), Some(-11.0));
        dense_f32(
            &DenseF32 {
                relu: true,
                ..linear
            },
            &x,
            &mut out,
        );
        assert_eq!(le::f32_at(&out, 1), Some(0.0));
    }

    #[test]
    fn short_slices_stop_early_without_panicking() {
        let p = DenseI8 {
            inputs: 4,
            weights: &[1, 2, 3],
            bias: &[0; 3],
            multiplier: &[],
            shift: &[],
            zero_point: 0,
            act_min: -128,
            act_max: 127,
            table: None,
        };
        let mut out = [9u8; 2];
        dense_i8(&p, &[1], &mut out);
        assert_eq!(out, [9, 9]);
        dense_f32(
            &DenseF32 {
                inputs: 0,
                weights: &[],
                bias: &[],
                relu: true,
            },
            &[],
            &mut out,
        );
    }
}
