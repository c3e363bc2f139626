//! int8 kernel for Cortex-M0/M0+ (Armv6-M, also used on Armv7-M without DSP and Armv8-M
//! Baseline): plain safe Rust, shaped so that the compiler keeps everything in the eight low
//! registers.
//!
//! Armv6-M has no unaligned word loads and no multiply-accumulate, and a signed byte load
//! only takes a register offset. The `Blocked4x4` layout stores weights excess-128, so each one
//! is a single `LDRB` with an immediate offset into the 16-byte group; each input is loaded once
//! and reused for the 4 rows of a block (`MULS` + `ADD` per weight). `128 · Σ x` is subtracted
//! once per layer (see [`super::portable::excess_correction`]).
use super::layout::{self, BLOCK_ROWS, GROUP, GROUP_ELEMS};
use super::portable::{excess_correction, finish_block, group_i8, row_params};
use super::DenseI8;

/// Adds one input's products with the 4 rows of a group: weights `g[k]`, `g[4 + k]`, ...
#[inline(always)]
fn column(acc: &mut [i32; BLOCK_ROWS], w: [u8; BLOCK_ROWS], x: i32) {
    let [a0, a1, a2, a3] = acc;
    let [w0, w1, w2, w3] = w;
    *a0 = a0.wrapping_add(i32::from(w0).wrapping_mul(x));
    *a1 = a1.wrapping_add(i32::from(w1).wrapping_mul(x));
    *a2 = a2.wrapping_add(i32::from(w2).wrapping_mul(x));
    *a3 = a3.wrapping_add(i32::from(w3).wrapping_mul(x));
}

/// Accumulates every full 4-input group of one block.
#[inline(always)]
fn block_groups(groups: &[[u8; GROUP_ELEMS]], x: &[[u8; GROUP]], acc: &mut [i32; BLOCK_ROWS]) {
    for (g, xs) in groups.iter().zip(x) {
        let [x0, x1, x2, x3] = xs.map(|v| i32::from(v as i8));
        column(acc, [g[0], g[4], g[8], g[12]], x0);
        column(acc, [g[1], g[5], g[9], g[13]], x1);
        column(acc, [g[2], g[6], g[10], g[14]], x2);
        column(acc, [g[3], g[7], g[11], g[15]], x3);
    }
}

/// Runs an int8 dense layer with `Blocked4x4` weights; the same results as
/// [`super::portable::dense_i8_blocked`].
pub fn dense_i8_blocked(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let n = p.inputs;
    let Some((_, data)) = layout::split(p.weights, n, output.len(), 1) else {
        return;
    };
    let x = input.get(..n).unwrap_or(&[]);
    let (full, tail) = x.as_chunks::<GROUP>();
    let correction = excess_correction(x, n);
    let mut params = row_params(p);
    let block_len = layout::padded(n) * BLOCK_ROWS;
    for (block, out) in data
        .chunks_exact(block_len.max(1))
        .zip(output.chunks_mut(BLOCK_ROWS))
    {
        let groups = block.as_chunks::<GROUP_ELEMS>().0;
        let mut acc = [0i32; BLOCK_ROWS];
        block_groups(groups, full, &mut acc);
        if let Some(g) = groups.get(full.len()) {
            group_i8(g, tail, &mut acc);
        }
        finish_block(p, acc, correction, &mut params, out);
    }
}
