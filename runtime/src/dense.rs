//! Dense (fully connected) kernels: `y = act(W x + b)` for int8 and f32.
//!
//! These are the portable kernels: plain Rust over byte slices, no alignment assumptions.
//! Validation guarantees the slice lengths agree with the shapes; should they not, the zipped
//! iterators simply stop early — they never index out of bounds.
use crate::le;
use crate::requant::requantize;

/// Parameters of one int8 dense layer, borrowed from the blob.
#[derive(Debug, Clone, Copy)]
pub struct DenseI8<'a> {
    /// Input width.
    pub inputs: usize,
    /// `[outputs][inputs]` int8 weights.
    pub weights: &'a [u8],
    /// `outputs` little-endian i32 biases (input zero point folded in).
    pub bias: &'a [u8],
    /// `outputs` little-endian i32 fixed-point multipliers.
    pub multiplier: &'a [u8],
    /// `outputs` signed shifts.
    pub shift: &'a [u8],
    /// Output zero point.
    pub zero_point: i8,
    /// Lower clamp (the zero point for a fused ReLU).
    pub act_min: i8,
    /// Upper clamp.
    pub act_max: i8,
}

/// Runs an int8 dense layer: `input` holds `inputs` int8 values, `output` receives one per row.
///
/// Accumulates in i32; [`crate::Model::parse`] proved that no int8 input can overflow it.
pub fn dense_i8(p: &DenseI8<'_>, input: &[u8], output: &mut [u8]) {
    let rows = p.weights.chunks_exact(p.inputs.max(1));
    let params = le::i32s(p.bias).zip(le::i32s(p.multiplier)).zip(p.shift);
    for ((row, out), ((bias, mult), &shift)) in rows.zip(output.iter_mut()).zip(params) {
        let mut acc = bias;
        for (&w, &x) in row.iter().zip(input) {
            acc += i32::from(w as i8) * i32::from(x as i8);
        }
        *out = requantize(acc, mult, shift as i8, p.zero_point, p.act_min, p.act_max) as u8;
    }
}

/// Runs an f32 dense layer over little-endian f32 bytes; `relu` clamps negatives to 0.
pub fn dense_f32(
    inputs: usize,
    weights: &[u8],
    bias: &[u8],
    relu: bool,
    input: &[u8],
    output: &mut [u8],
) {
    let rows = weights.chunks_exact(inputs.max(1).saturating_mul(4));
    let outs = output.as_chunks_mut::<4>().0.iter_mut();
    for ((row, out), b) in rows.zip(outs).zip(le::f32s(bias)) {
        let mut acc = 0.0f32;
        for (w, x) in le::f32s(row).zip(le::f32s(input)) {
            acc += w * x;
        }
        acc += b;
        if relu && acc < 0.0 {
            acc = 0.0;
        }
        *out = acc.to_le_bytes();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bytes_i32(v: &[i32]) -> Vec<u8> {
        v.iter().flat_map(|x| x.to_le_bytes()).collect()
    }

    fn bytes_f32(v: &[f32]) -> Vec<u8> {
        v.iter().flat_map(|x| x.to_le_bytes()).collect()
    }

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
        dense_f32(2, &w, &b, false, &x, &mut out);
        assert_eq!(le::f32_at(&out, 0), Some(11.5));
        assert_eq!(le::f32_at(&out, 1), Some(-11.0));
        dense_f32(2, &w, &b, true, &x, &mut out);
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
        };
        let mut out = [9u8; 2];
        dense_i8(&p, &[1], &mut out);
        assert_eq!(out, [9, 9]);
        dense_f32(0, &[], &[], true, &[], &mut out);
    }
}
