//! First-layer kernels for an int16 input tensor (format version 7, `FORMAT.md` §3.6): int16
//! inputs times int8 weights, in the int8 kernels' i32 accumulator, with their requantisation
//! and stores. Plain safe Rust on every target (the same code is the reference and the
//! Cortex-M kernel); `runtime/tests/kernels_prop.rs` checks both layouts against a naive sum.
//!
//! Sums wrap (`wrapping_add`): [`crate::Model::parse`] proved `|bias| + 32768 · Σ|w|` fits in
//! i32, so the true accumulator does, and a wrapping sum of exact products is exact modulo
//! 2^32, hence exact. That is what lets the `Blocked4x4` kernel add the excess-128 bytes as
//! they are and subtract `128 · Σx` once: its partial sums may leave i32 on the way.
use super::portable::{finish_block, row_params};
use super::DenseI8;
use crate::requant::requantise_reference;
use crate::wire::layout::{self, BLOCK_ROWS, GROUP, GROUP_ELEMS};

/// The little-endian int16 inputs of `input` (two bytes each).
#[inline(always)]
fn inputs_i16(input: &[u8]) -> impl Iterator<Item = i32> + Clone + '_ {
    input
        .as_chunks::<2>()
        .0
        .iter()
        .map(|b| i32::from(i16::from_le_bytes(*b)))
}

/// Runs the first layer of an int16-input model with `OutputMajor` int8 weights: `input` holds
/// `inputs` little-endian int16 values, `output` receives one int8 per row.
pub fn dense_i16(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    // `chunks` by `&mut`, as `portable::dense_i8`: no division for the row count.
    let mut rows = p.weights.chunks(p.inputs.max(1));
    for ((row, out), (bias, mult, shift)) in (&mut rows).zip(output.iter_mut()).zip(row_params(p)) {
        let mut acc = bias;
        for (&w, x) in row.iter().zip(inputs_i16(input)) {
            acc = acc.wrapping_add(i32::from(w as i8) * x);
        }
        *out = super::store_i8(
            p.table,
            requantise_reference(acc, mult, shift, p.zero_point, p.act_min, p.act_max),
        );
    }
}

/// Runs the first layer of an int16-input model with `Blocked4x4` int8 weights (the whole
/// field, alignment bytes included; excess-128 bytes, `FORMAT.md` §3.1); `output.len()` is the
/// layer's output width.
pub fn dense_i16_blocked(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let n = p.inputs;
    let Some((_, data)) = layout::split(p.weights, n, output.len(), 1) else {
        return;
    };
    let x = input.get(..n.saturating_mul(2)).unwrap_or(&[]);
    let correction = inputs_i16(x)
        .fold(0i32, |s, v| s.wrapping_add(v))
        .wrapping_mul(128);
    // Whole groups of four inputs, and a partial last one zero-extended (its padding weights
    // then add nothing).
    let (full, tail) = x.as_chunks::<{ 2 * GROUP }>();
    let mut last = [0u8; 2 * GROUP];
    for (d, s) in last.iter_mut().zip(tail) {
        *d = *s;
    }
    let mut params = row_params(p);
    let block_len = layout::padded(n) * BLOCK_ROWS;
    for (block, out) in data
        .chunks_exact(block_len.max(1))
        .zip(output.chunks_mut(BLOCK_ROWS))
    {
        let groups = block.as_chunks::<GROUP_ELEMS>().0;
        let mut acc = [0i32; BLOCK_ROWS];
        for (g, xg) in groups.iter().zip(full) {
            acc = mac_group(acc, g, xg);
        }
        if !tail.is_empty() {
            if let Some(g) = groups.get(full.len()) {
                acc = mac_group(acc, g, &last);
            }
        }
        finish_block(p, acc, correction, &mut params, out);
    }
}

/// One group of a block: four rows of four excess-128 weight bytes times the group's four
/// little-endian int16 inputs, added to the rows' sums. Written out, no inner loops: at
/// opt-level "s" a loop over four elements stays a loop (and its array on the stack). On the
/// 784 → 100 layer of `kernel-bench` this shape takes 3.13 instructions per MAC on the
/// Cortex-M4 (`SMLABB` on byte and halfword loads) and 6.30 on the M0, against 9.63 and 18.73
/// for a zip of each row with the inputs decoded again per row. A row's four products are at
/// most 4 · 255 · 32768 < 2^25 in size, so only the running sums can wrap.
#[inline(always)]
fn mac_group(
    acc: [i32; BLOCK_ROWS],
    g: &[u8; GROUP_ELEMS],
    xg: &[u8; 2 * GROUP],
) -> [i32; BLOCK_ROWS] {
    let [b0, b1, b2, b3, b4, b5, b6, b7] = *xg;
    let x0 = i32::from(i16::from_le_bytes([b0, b1]));
    let x1 = i32::from(i16::from_le_bytes([b2, b3]));
    let x2 = i32::from(i16::from_le_bytes([b4, b5]));
    let x3 = i32::from(i16::from_le_bytes([b6, b7]));
    let dot = |w0: u8, w1: u8, w2: u8, w3: u8| {
        i32::from(w0) * x0 + i32::from(w1) * x1 + i32::from(w2) * x2 + i32::from(w3) * x3
    };
    let [w0, w1, w2, w3, w4, w5, w6, w7, w8, w9, w10, w11, w12, w13, w14, w15] = *g;
    let [a0, a1, a2, a3] = acc;
    [
        a0.wrapping_add(dot(w0, w1, w2, w3)),
        a1.wrapping_add(dot(w4, w5, w6, w7)),
        a2.wrapping_add(dot(w8, w9, w10, w11)),
        a3.wrapping_add(dot(w12, w13, w14, w15)),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wire::layout::{elements, encode_i8, index};

    /// A naive reference: `bias + Σ w·x` in i64, then the reference requantisation.
    fn naive(w: &[i8], x: &[i16], bias: &[i32], mult: i32, shift: i8) -> Vec<i8> {
        let n = x.len();
        bias.iter()
            .enumerate()
            .map(|(o, &b)| {
                let acc: i64 = i64::from(b)
                    + (0..n)
                        .map(|i| i64::from(w[o * n + i]) * i64::from(x[i]))
                        .sum::<i64>();
                let acc = i32::try_from(acc).unwrap();
                requantise_reference(acc, mult, shift, -3, -128, 127)
            })
            .collect()
    }

    /// Both layouts agree with the naive sum on full-range int16 inputs, for shapes that fill
    /// whole blocks and shapes that need padding.
    #[test]
    fn both_layouts_match_a_naive_sum() {
        let mut state = 0x1234_5678_u32;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            state
        };
        for (outputs, inputs) in [(1, 1), (3, 5), (4, 4), (7, 9), (16, 64)] {
            let w: Vec<i8> = (0..outputs * inputs).map(|_| next() as i8).collect();
            let x: Vec<i16> = (0..inputs).map(|_| next() as i16).collect();
            // Extremes too: the int16 ends.
            let mut xs = vec![x];
            xs.push(vec![-32_768; inputs]);
            xs.push(vec![32_767; inputs]);
            let bias: Vec<i32> = (0..outputs).map(|_| (next() % 1000) as i32 - 500).collect();
            let (mult, shift) = (1 << 30, 20i8);
            let rep = |v: &[i32]| v.iter().flat_map(|b| b.to_le_bytes()).collect::<Vec<u8>>();
            let (bias_b, mult_b) = (rep(&bias), rep(&vec![mult; outputs]));
            let shifts = vec![shift as u8; outputs];
            let om: Vec<u8> = w.iter().map(|&v| v as u8).collect();
            let mut blocked = vec![layout::ZERO_I8; elements(inputs, outputs)];
            for o in 0..outputs {
                for i in 0..inputs {
                    blocked[index(o, i, inputs)] = encode_i8(w[o * inputs + i]);
                }
            }
            for x in xs {
                let input: Vec<u8> = x.iter().flat_map(|v| v.to_le_bytes()).collect();
                let want = naive(&w, &x, &bias, mult, shift);
                for (weights, blocked_layout) in [(&om, false), (&blocked, true)] {
                    let p = DenseI8 {
                        inputs,
                        weights,
                        bias: &bias_b,
                        multiplier: &mult_b,
                        shift: &shifts,
                        zero_point: -3,
                        act_min: -128,
                        act_max: 127,
                        table: None,
                    };
                    let mut out = vec![0u8; outputs];
                    if blocked_layout {
                        dense_i16_blocked(&p, &input, &mut out);
                    } else {
                        dense_i16(&p, &input, &mut out);
                    }
                    let got: Vec<i8> = out.iter().map(|&b| b as i8).collect();
                    assert_eq!(got, want, "{outputs}x{inputs} blocked {blocked_layout}");
                }
            }
        }
    }
}
