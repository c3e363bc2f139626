//! The baseline: straightforward scalar loops over output-major weights, one multiply-add per
//! step with indexing, as one would first write them. Same arithmetic as the runtime, so the
//! outputs agree (the self-check compares them too). The indexed loops are the point of the
//! baseline, so clippy's iterator advice (`needless_range_loop`) is turned off here.
#![allow(clippy::needless_range_loop)]
use kinglet_runtime::unstable::dense::DenseI8;
use kinglet_runtime::unstable::requant::requantise_reference;

fn word(b: &[u8], i: usize) -> [u8; 4] {
    [b[4 * i], b[4 * i + 1], b[4 * i + 2], b[4 * i + 3]]
}

/// Naive int8 dense layer.
#[inline(never)]
pub fn dense_i8(p: &DenseI8<'_>, x: &[u8], out: &mut [u8]) {
    let n = p.inputs;
    for o in 0..out.len() {
        let mut acc = i32::from_le_bytes(word(p.bias, o));
        for i in 0..n {
            acc += i32::from(p.weights[o * n + i] as i8) * i32::from(x[i] as i8);
        }
        let m = i32::from_le_bytes(word(p.multiplier, o));
        let s = p.shift[o] as i8;
        out[o] = requantise_reference(acc, m, s, p.zero_point, p.act_min, p.act_max) as u8;
    }
}

/// Naive int4 dense layer (`FORMAT.md` §3.5): each weight read on its own from its nibble,
/// then as [`dense_i8`].
#[inline(never)]
pub fn dense_i4(p: &DenseI8<'_>, x: &[u8], out: &mut [u8]) {
    use kinglet_runtime::unstable::wire::nibble;
    let n = p.inputs;
    let data = nibble::split(p.weights, n, out.len()).map_or(p.weights, |(_, d)| d);
    for o in 0..out.len() {
        let mut acc = i32::from_le_bytes(word(p.bias, o));
        for i in 0..n {
            let w = nibble::get(data, o, i, n).unwrap_or(0);
            acc += i32::from(w) * i32::from(x[i] as i8);
        }
        let m = i32::from_le_bytes(word(p.multiplier, o));
        let s = p.shift[o] as i8;
        out[o] = requantise_reference(acc, m, s, p.zero_point, p.act_min, p.act_max) as u8;
    }
}

/// Naive first layer of an int16-input model (`FORMAT.md` §3.6): `x` holds little-endian
/// int16 inputs (two bytes each), the weights are output-major int8; then as [`dense_i8`].
#[inline(never)]
pub fn dense_i16(p: &DenseI8<'_>, x: &[u8], out: &mut [u8]) {
    let n = p.inputs;
    for o in 0..out.len() {
        let mut acc = i32::from_le_bytes(word(p.bias, o));
        for i in 0..n {
            let v = i16::from_le_bytes([x[2 * i], x[2 * i + 1]]);
            acc += i32::from(p.weights[o * n + i] as i8) * i32::from(v);
        }
        let m = i32::from_le_bytes(word(p.multiplier, o));
        let s = p.shift[o] as i8;
        out[o] = requantise_reference(acc, m, s, p.zero_point, p.act_min, p.act_max) as u8;
    }
}

/// Naive f32 dense layer.
#[inline(never)]
pub fn dense_f32(n: usize, w: &[u8], bias: &[u8], relu: bool, x: &[u8], out: &mut [u8]) {
    for o in 0..out.len() / 4 {
        let mut acc = 0.0f32;
        for i in 0..n {
            acc += f32::from_le_bytes(word(w, o * n + i)) * f32::from_le_bytes(word(x, i));
        }
        acc += f32::from_le_bytes(word(bias, o));
        if relu && acc < 0.0 {
            acc = 0.0;
        }
        out[4 * o..4 * o + 4].copy_from_slice(&acc.to_le_bytes());
    }
}
