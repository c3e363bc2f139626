//! int8 kernel for Cortex-M0/M0+ in plain safe Rust, compiled everywhere: the reference for
//! the Thumb-1 `asm!` kernel ([`super::asm`], which the Armv6-M-class targets use) and a
//! host-tested user of the shared block loop `super::fixed::blocks_i8`.
//!
//! Armv6-M has no unaligned word loads and no multiply-accumulate, and a signed byte load
//! only takes a register offset. The `Blocked4x4` layout stores weights excess-128, so each one
//! is a single `LDRB` with an immediate offset into the 16-byte group; each input is loaded once
//! and reused for the 4 rows of a block (`MULS` + `ADD` per weight). `128 · Σ x` is subtracted
//! once per layer (see [`super::portable::excess_correction`]).
use super::layout::{BLOCK_ROWS, GROUP, GROUP_ELEMS};
use super::portable::excess_correction;
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
fn block_groups(groups: &[[u8; GROUP_ELEMS]], x: &[[u8; GROUP]]) -> [i32; BLOCK_ROWS] {
    let mut acc = [0i32; BLOCK_ROWS];
    for (g, xs) in groups.iter().zip(x) {
        let [x0, x1, x2, x3] = xs.map(|v| i32::from(v as i8));
        column(&mut acc, [g[0], g[4], g[8], g[12]], x0);
        column(&mut acc, [g[1], g[5], g[9], g[13]], x1);
        column(&mut acc, [g[2], g[6], g[10], g[14]], x2);
        column(&mut acc, [g[3], g[7], g[11], g[15]], x3);
    }
    acc
}

/// Runs an int8 dense layer with `Blocked4x4` weights; the same results as
/// [`super::portable::dense_i8_blocked`].
pub fn dense_i8_blocked(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let correction = excess_correction(input, p.inputs);
    super::fixed::blocks_i8(p, input, output, correction, block_groups);
}
