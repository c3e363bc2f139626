//! The int4 (`Nibble4x4`, `FORMAT.md` §3.5) kernel in plain Rust, and the arithmetic every int4
//! kernel shares: the two sums per byte and how they become the rows' dot products.
//!
//! A byte `u` holds two rows' weights for one input, excess-8: `u = 16 · (w_hi + 8) +
//! (w_lo + 8)`. Per row pair a kernel accumulates `S = Σ u x` and `L = Σ (u mod 16) x`
//! (unsigned weights times int8 inputs); then `Σ w_lo x = L − 8 Σ x` and
//! `Σ w_hi x = (S − L) / 16 − 8 Σ x`. `S − L = 16 · Σ (w_hi + 8) x` exactly, so the division is
//! an exact arithmetic shift; and `|S| ≤ 255 · 128 · 16,384 < 2^31` (`MAX_WIDTH` inputs), so
//! no sum wraps. The results are those of int8 weights `w` with the same requantisation.
use super::portable::excess_correction;
use super::DenseI8;
use crate::wire::layout::{BLOCK_ROWS, GROUP};
use crate::wire::nibble::GROUP_BYTES;

/// Adds one group of one block (`x.len()` ≤ 4 inputs) into the sums `[S0, L0, S1, L1]`.
#[inline(always)]
pub(crate) fn group_i4(group: &[u8; GROUP_BYTES], x: &[u8], sums: &mut [i32; BLOCK_ROWS]) {
    let (pairs, _) = group.as_chunks::<GROUP>();
    for (s, pair) in sums.as_chunks_mut::<2>().0.iter_mut().zip(pairs) {
        for (&u, &x) in pair.iter().zip(x) {
            let x = i32::from(x as i8);
            s[0] = s[0].wrapping_add(i32::from(u) * x);
            s[1] = s[1].wrapping_add(i32::from(u & 0x0F) * x);
        }
    }
}

/// The 4 rows' `Σ (w + 8) x` from the sums `[S0, L0, S1, L1]` (the caller subtracts `8 Σ x`).
#[inline(always)]
pub(crate) fn rows([s0, l0, s1, l1]: [i32; BLOCK_ROWS]) -> [i32; BLOCK_ROWS] {
    [l0, s0.wrapping_sub(l0) >> 4, l1, s1.wrapping_sub(l1) >> 4]
}

/// The sums of a block's full groups, lane-wise so that a wide host vectorises them.
#[inline(always)]
fn groups_portable(w: &[[u8; GROUP_BYTES]], x: &[[u8; GROUP]]) -> [i32; BLOCK_ROWS] {
    let mut lanes = [[0i32; GROUP]; BLOCK_ROWS];
    for (g, xg) in w.iter().zip(x) {
        let xs = xg.map(|v| i32::from(v as i8));
        let (pairs, _) = g.as_chunks::<GROUP>();
        for ([s, l], pair) in lanes.as_chunks_mut::<2>().0.iter_mut().zip(pairs) {
            for (((s, l), &u), &xv) in s.iter_mut().zip(l.iter_mut()).zip(pair).zip(&xs) {
                *s = s.wrapping_add(i32::from(u) * xv);
                *l = l.wrapping_add(i32::from(u & 0x0F) * xv);
            }
        }
    }
    lanes.map(|l| l.iter().fold(0i32, |a, &v| a.wrapping_add(v)))
}

/// Runs an int8 dense layer with int4 `Nibble4x4` weights (the whole field, alignment bytes
/// included); `output.len()` is the layer's output width. The reference the target kernels
/// match bit for bit.
pub fn dense_i4_portable(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let correction = excess_correction(input, p.inputs);
    super::fixed::blocks_i4(p, input, output, correction, groups_portable);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wire::nibble;
    use kinglet_builder::le::i32s as bytes_i32;

    #[test]
    fn int4_dense_hand_worked() {
        // W = [[1, -8, 7], [-1, 0, 3]], x = [10, -20, 30], b = [5, -7], M = 1/8 (2^30, shift 2).
        // acc0 = 5 + 10 + 160 + 210 = 385 → 48.125 → 48; acc1 = -7 - 10 + 0 + 90 = 73 → 9.125 → 9.
        let w = [1i8, -8, 7, -1, 0, 3];
        let mut field = vec![0u8; 1 + nibble::bytes(3, 2)];
        assert!(nibble::pack(3, 2, &w, &mut field[1..]));
        let x: Vec<u8> = [10i8, -20, 30].iter().map(|&v| v as u8).collect();
        let p = DenseI8 {
            inputs: 3,
            weights: &field,
            bias: &bytes_i32(&[5, -7]),
            multiplier: &bytes_i32(&[1 << 30, 1 << 30]),
            shift: &[2, 2],
            zero_point: 0,
            act_min: -128,
            act_max: 127,
            table: None,
        };
        let mut out = [0u8; 2];
        dense_i4_portable(&p, &x, &mut out);
        assert_eq!(out.map(|v| v as i8), [48, 9]);
    }

    #[test]
    fn sums_to_rows_hand_worked() {
        // One byte per pair, x = 3: row 0 w = -8 (nibble 0), row 1 w = 7 (nibble 15): u = 0xF0.
        let mut s = [0; BLOCK_ROWS];
        group_i4(
            &[0xF0, 0x88, 0x88, 0x88, 0x88, 0x88, 0x88, 0x88],
            &[3],
            &mut s,
        );
        assert_eq!(s, [720, 0, 3 * 0x88, 24]);
        // Σ (w + 8) x: 0 · 3, 15 · 3, 8 · 3, 8 · 3.
        assert_eq!(rows(s), [0, 45, 24, 24]);
    }
}
