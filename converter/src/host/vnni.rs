//! An exact int8 matrix product with AVX-512 VNNI (`vpdpbusd`), for hosts that have it.
//!
//! `out[r][o] = Σ_i x[r][i] · w[o][i]` for int8 `x` and `w`, in wrapping i32 arithmetic, the
//! runtime kernels' own arithmetic. `vpdpbusd` (`_mm512_dpbusd_epi32`) multiplies unsigned
//! bytes by signed bytes, four adjacent pairs per 32-bit lane, and adds the four products to
//! the lane without saturation (the saturating form is `vpdpbusds`; Rust's `core::arch` docs
//! and Intel's intrinsics guide say so). So the input is shifted to unsigned,
//! `u = x + 128` (the byte `x ^ 0x80`), and `Σ_i w_i · u_i − 128 · Σ_i w_i` is the dot product.
//! Every step is exact in i32 modulo 2^32: each u8 × i8 product (|p| ≤ 255 · 128) and each
//! sum of four fit in i32, the lane additions wrap, and a wrapping sum is the true sum modulo
//! 2^32 whatever the order. [`kinglet_runtime::Model::parse`] has proved that `bias + dot` fits
//! in i32, so the result, with the bias added in wrapping i32 by the caller, is the runtime's.
//!
//! Why `unsafe` is needed here (and only here in the crate): a `#[target_feature]` function
//! can only be called from code without those features through `unsafe`, after checking at run
//! time that the CPU has them. The intrinsics themselves are safe inside it (Rust ≥ 1.87), and
//! every load and store is a safe slice access or a `bytemuck` cast, so the one `unsafe` block
//! is the call in [`Packed::product`]. No matrix-multiplication crate we use (`faer`) has an
//! integer product; this module is the smallest kernel that gives one.
//!
//! Where the CPU lacks AVX-512 VNNI, under Miri, or off x86-64, [`Packed::new`] returns `None`
//! and the caller keeps its portable exact product (`host::int8`).
#![allow(unsafe_code)]

use core::arch::x86_64::{__m512i, _mm512_dpbusd_epi32, _mm512_set1_epi32, _mm512_setzero_si512};

/// Outputs per vector: sixteen i32 lanes.
const LANES: usize = 16;
/// Rows per tile: four rows share each weight vector loaded.
const ROWS: usize = 4;
/// Output vectors per tile (at most): 4 rows × 4 vectors = 16 accumulators, with the 4 weight
/// vectors and a broadcast input within the 32 vector registers.
const TILE: usize = 4;

/// Whether this CPU runs the kernel (checked at run time; never under Miri).
pub(crate) fn available() -> bool {
    !cfg!(miri)
        && is_x86_feature_detected!("avx512f")
        && is_x86_feature_detected!("avx512bw")
        && is_x86_feature_detected!("avx512vnni")
}

/// A layer's `[outputs][inputs]` int8 weights packed for the kernel, once per model.
#[derive(Debug, Clone)]
pub(crate) struct Packed {
    inputs: usize,
    outputs: usize,
    /// `ceil(inputs / 4)`: groups of four inputs, one byte each in a 32-bit lane.
    groups: usize,
    /// `ceil(outputs / 16)`.
    blocks: usize,
    /// `[group][block]`: lane `j` of vector `(g, b)` holds `w[16b + j][4g..4g + 4]`, zeros
    /// past the matrix's edges.
    w: Vec<__m512i>,
    /// `128 · Σ_i w_oi` per output, wrapping, to subtract for the input's shift.
    shift_sum: Vec<i32>,
}

impl Packed {
    /// Packs `w` (`outputs × inputs`, row-major); `None` unless the CPU has AVX-512 VNNI or if
    /// `w` is not that long.
    pub(crate) fn new(w: &[i8], inputs: usize, outputs: usize) -> Option<Self> {
        if !available() || w.len() != inputs * outputs {
            return None;
        }
        let (groups, blocks) = (inputs.div_ceil(4), outputs.div_ceil(LANES));
        let weight = |o: usize, i: usize| -> u8 {
            if i < inputs {
                w.get(o * inputs + i).map_or(0, |&v| v as u8)
            } else {
                0
            }
        };
        let mut packed = Vec::with_capacity(groups * blocks);
        for g in 0..groups {
            for b in 0..blocks {
                let mut bytes = [0u8; 64];
                for (j, lane) in bytes.chunks_exact_mut(4).enumerate() {
                    let o = b * LANES + j;
                    if o < outputs {
                        for (k, byte) in lane.iter_mut().enumerate() {
                            *byte = weight(o, 4 * g + k);
                        }
                    }
                }
                packed.push(bytemuck::cast::<[u8; 64], __m512i>(bytes));
            }
        }
        let shift_sum = w
            .chunks(inputs.max(1))
            .take(outputs)
            .map(|row| {
                let s: i32 = row.iter().map(|&v| i32::from(v)).sum();
                s.wrapping_mul(128)
            })
            .collect();
        Some(Packed {
            inputs,
            outputs,
            groups,
            blocks,
            w: packed,
            shift_sum,
        })
    }

    /// Bytes per row of the kernel's input: the inputs rounded up to a multiple of four.
    pub(crate) fn stride(&self) -> usize {
        self.groups * 4
    }

    /// `128 · Σ_i w_oi` per output (wrapping): `Σ_i w_oi · (x_i ^ 0x80) − this` is the dot
    /// product.
    pub(crate) fn shift_sum(&self) -> &[i32] {
        &self.shift_sum
    }

    /// `out = u · wᵀ` in wrapping i32: `u` is `rows × stride()` bytes, each input shifted to
    /// unsigned (`x ^ 0x80`; the padding bytes of a row are any value), `out` is
    /// `rows × outputs`. Subtract [`Packed::shift_sum`] per output for the int8 dot products.
    /// Does nothing unless the lengths are those.
    pub(crate) fn product(&self, u: &[u8], rows: usize, out: &mut [i32]) {
        if u.len() != rows * self.stride() || out.len() != rows * self.outputs || rows == 0 {
            return;
        }
        if self.inputs == 0 {
            out.fill(0);
            return;
        }
        // SAFETY: `Packed` exists only where `available()` found the features `product_vnni`
        // is compiled for (`new` returns `None` otherwise), on the CPU running this process.
        // The function itself does every memory access through bounds-checked slices.
        unsafe { product_vnni(self, u, out) }
    }
}

/// [`Packed::product`] in tiles of up to [`ROWS`] rows by [`TILE`] output vectors.
#[target_feature(enable = "avx512f,avx512bw,avx512vnni")]
fn product_vnni(p: &Packed, u: &[u8], out: &mut [i32]) {
    let (stride, m) = (p.stride(), p.outputs);
    for (u, out) in u.chunks(ROWS * stride).zip(out.chunks_mut(ROWS * m)) {
        let mut b = 0;
        while b < p.blocks {
            let t = (p.blocks - b).min(TILE);
            match (u.len() / stride, t) {
                (ROWS, 4) => tile::<ROWS, 4>(p, u, b, out),
                (ROWS, 3) => tile::<ROWS, 3>(p, u, b, out),
                (ROWS, 2) => tile::<ROWS, 2>(p, u, b, out),
                (ROWS, _) => tile::<ROWS, 1>(p, u, b, out),
                (r, _) => {
                    // Fewer than `ROWS` rows left: one row at a time.
                    for (u, out) in u.chunks(stride).zip(out.chunks_mut(m)).take(r) {
                        match t {
                            4 => tile::<1, 4>(p, u, b, out),
                            3 => tile::<1, 3>(p, u, b, out),
                            2 => tile::<1, 2>(p, u, b, out),
                            _ => tile::<1, 1>(p, u, b, out),
                        }
                    }
                }
            }
            b += t;
        }
    }
}

/// `R` rows (`u`, `R × stride` bytes) by output vectors `b0..b0 + T` into `out` (`R × outputs`).
#[target_feature(enable = "avx512f,avx512bw,avx512vnni")]
#[inline]
fn tile<const R: usize, const T: usize>(p: &Packed, u: &[u8], b0: usize, out: &mut [i32]) {
    let (stride, m) = (p.stride(), p.outputs);
    let mut acc = [[_mm512_setzero_si512(); T]; R];
    let mut rows: [&[[u8; 4]]; R] = [&[]; R];
    for (r, row) in rows.iter_mut().zip(u.chunks_exact(stride)) {
        *r = row.as_chunks::<4>().0;
    }
    for (g, wg) in p.w.chunks_exact(p.blocks).enumerate() {
        let Some(wt) = wg.get(b0..b0 + T) else { return };
        for (acc, row) in acc.iter_mut().zip(&rows) {
            let x = _mm512_set1_epi32(i32::from_ne_bytes(row.get(g).copied().unwrap_or([0; 4])));
            for (a, &w) in acc.iter_mut().zip(wt) {
                *a = _mm512_dpbusd_epi32(*a, x, w);
            }
        }
    }
    for (acc, out) in acc.iter().zip(out.chunks_mut(m)) {
        for (t, a) in acc.iter().enumerate() {
            let lanes: [i32; LANES] = bytemuck::cast(*a);
            let at = (b0 + t) * LANES;
            if let Some(dst) = out.get_mut(at..(at + LANES).min(m)) {
                dst.copy_from_slice(lanes.get(..dst.len()).unwrap_or_default());
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The textbook triple loop in i64, then wrapped to i32.
    fn naive(x: &[i8], w: &[i8], rows: usize, n: usize, m: usize) -> Vec<i32> {
        (0..rows)
            .flat_map(|r| {
                (0..m).map(move |o| {
                    (0..n)
                        .map(|i| i64::from(x[r * n + i]) * i64::from(w[o * n + i]))
                        .sum::<i64>() as i32
                })
            })
            .collect()
    }

    /// The kernel's dot products (shifted input, then the shift's sum subtracted).
    fn vnni(p: &Packed, x: &[i8], rows: usize) -> Vec<i32> {
        let (n, s) = (p.inputs, p.stride());
        let mut u = vec![0xAAu8; rows * s];
        for (dst, src) in u.chunks_exact_mut(s).zip(x.chunks_exact(n.max(1))) {
            for (d, &v) in dst.iter_mut().zip(src) {
                *d = v as u8 ^ 0x80;
            }
        }
        let mut out = vec![0; rows * p.outputs];
        p.product(&u, rows, &mut out);
        for row in out.chunks_exact_mut(p.outputs.max(1)) {
            for (v, &c) in row.iter_mut().zip(p.shift_sum()) {
                *v = v.wrapping_sub(c);
            }
        }
        out
    }

    /// Equal to the triple loop on random shapes (inputs not a multiple of 4 or 64, outputs
    /// not a multiple of 16, row counts not a multiple of 4) and on the extremes: inputs of
    /// -128 and 127 (0 and 255 once shifted) against weights of -128 and 127. Runs only where
    /// the CPU has AVX-512 VNNI (it passes vacuously elsewhere; the portable product has its
    /// own test in `host::int8`).
    #[test]
    fn vnni_product_is_the_triple_loop() {
        if !available() {
            eprintln!("no AVX-512 VNNI on this CPU: kernel not tested");
            return;
        }
        // xorshift32 (Marsaglia, 2003), seeded.
        let mut state = 0x1234_5678_u32;
        let mut next = move || {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            state
        };
        let shapes = [
            (1, 1, 1),
            (3, 5, 7),
            (4, 64, 16),
            (5, 65, 17),
            (9, 784, 100),
            (7, 100, 10),
            (13, 131, 70),
            (2, 1000, 33),
        ];
        for (rows, n, m) in shapes {
            for extreme in [
                None,
                Some((-128i8, -128i8)),
                Some((127, -128)),
                Some((-128, 127)),
            ] {
                let (x, w): (Vec<i8>, Vec<i8>) = match extreme {
                    None => (
                        (0..rows * n).map(|_| next() as i8).collect(),
                        (0..m * n).map(|_| next() as i8).collect(),
                    ),
                    Some((xv, wv)) => (vec![xv; rows * n], vec![wv; m * n]),
                };
                let p = Packed::new(&w, n, m).unwrap();
                assert_eq!(
                    vnni(&p, &x, rows),
                    naive(&x, &w, rows, n, m),
                    "{rows}×{n}×{m}"
                );
            }
        }
        // Wrong lengths leave the output alone.
        let p = Packed::new(&[1, 2, 3], 3, 1).unwrap();
        let mut out = vec![7; 2];
        p.product(&[0; 4], 2, &mut out);
        assert_eq!(out, vec![7, 7]);
        assert!(Packed::new(&[1, 2], 3, 1).is_none());
    }
}
