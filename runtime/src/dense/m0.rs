//! int8 kernel for Cortex-M0/M0+ in plain safe Rust, compiled everywhere: the reference for
//! the Thumb-1 `asm!` kernel (`dense::asm`, which the Armv6-M-class targets use) and a
//! host-tested user of the shared block loop `super::fixed::blocks_i8`.
//!
//! Armv6-M has no unaligned word loads and no multiply-accumulate, and a signed byte load
//! only takes a register offset. The `Blocked4x4` layout stores weights excess-128, so each one
//! is a single `LDRB` with an immediate offset into the 16-byte group; each input is loaded once
//! and reused for the 4 rows of a block (`MULS` + `ADD` per weight). `128 · Σ x` is subtracted
//! once per layer (see [`super::portable::excess_correction`]).
use super::portable::excess_correction;
use super::{DenseF32, DenseI8};
use crate::wire::layout::{BLOCK_ROWS, GROUP, GROUP_ELEMS};

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
/// [`super::portable::dense_i8_blocked_portable`].
pub fn dense_i8_blocked_m0_rust(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let correction = excess_correction(input, p.inputs);
    super::fixed::blocks_i8(p, input, output, correction, block_groups);
}

/// Runs an f32 dense layer with `Blocked4x4` weights, one block at a time; the same results as
/// [`super::portable::dense_f32_blocked_portable`] (each row adds its products in input order from
/// `+0.0`, then the bias). The soft-float targets use it: it is several times smaller than the
/// portable kernel, which interleaves two blocks for speed on hosts.
pub fn dense_f32_blocked_m0_rust(p: &DenseF32<'_>, input: &[u8], output: &mut [u8]) {
    let outs = output.as_chunks_mut::<4>().0;
    let Some(super::blocked_f32::Cut { data, x, block_len }) =
        super::blocked_f32::cut(p, outs.len(), input)
    else {
        return;
    };
    let mut biases = crate::le::f32s(p.bias);
    for (block, out) in data
        .chunks_exact(block_len.max(1))
        // `&mut`: see `super::fixed::blocks_i8`.
        .zip(&mut outs.chunks_mut(BLOCK_ROWS))
    {
        let mut acc = [0.0f32; BLOCK_ROWS];
        for (g, xg) in block.chunks_exact(GROUP_ELEMS * 4).zip(x.chunks(GROUP * 4)) {
            for (a, row) in acc.iter_mut().zip(g.chunks_exact(GROUP * 4)) {
                for (w, x) in crate::le::f32s(row).zip(crate::le::f32s(xg)) {
                    *a += w * x;
                }
            }
        }
        super::blocked_f32::finish(&acc, &mut biases, p.relu, out);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dense::portable;
    use crate::wire::layout;

    /// Small deterministic generator (xorshift32) for test data.
    fn next(s: &mut u32) -> u32 {
        *s ^= *s << 13;
        *s ^= *s >> 17;
        *s ^= *s << 5;
        *s
    }

    #[test]
    fn f32_blocked_matches_the_portable_output_major_kernel() {
        let mut s = 0x1234_5678u32;
        for n in 1..=13 {
            for m in 1..=9 {
                let w: Vec<f32> = (0..n * m)
                    .map(|_| (next(&mut s) % 2001) as f32 / 1000.0 - 1.0)
                    .collect();
                let om: Vec<u8> = w.iter().flat_map(|v| v.to_le_bytes()).collect();
                let pad = (next(&mut s) % 4) as usize;
                let mut field = vec![0u8; pad + 4 * layout::elements(n, m)];
                assert!(layout::block_f32(n, m, &w, &mut field[pad..]));
                let x: Vec<u8> = (0..n)
                    .flat_map(|_| ((next(&mut s) % 2001) as f32 / 100.0 - 10.0).to_le_bytes())
                    .collect();
                let b: Vec<u8> = (0..m)
                    .flat_map(|_| ((next(&mut s) % 201) as f32 / 10.0 - 10.0).to_le_bytes())
                    .collect();
                for relu in [false, true] {
                    let blocked = DenseF32 {
                        inputs: n,
                        weights: &field,
                        bias: &b,
                        relu,
                    };
                    let mut want = vec![0u8; 4 * m];
                    let output_major = DenseF32 {
                        weights: &om,
                        ..blocked
                    };
                    portable::dense_f32(&output_major, &x, &mut want);
                    let mut got = vec![1u8; 4 * m];
                    dense_f32_blocked_m0_rust(&blocked, &x, &mut got);
                    assert_eq!(got, want, "{n}x{m} relu {relu}");
                }
            }
        }
    }
}
