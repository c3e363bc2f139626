//! The runtime's softmax over a whole batch of rows, in loops the compiler vectorises, with the
//! runtime's results bit for bit.
//!
//! The runtime calls `libm::expf` once per score, a function with branches that does not
//! vectorise; over 10,000 rows of ten scores that was a tenth of the batched passes' time.
//! [`expf`] is the same function (libm 0.2's port of FreeBSD's `e_expf.c`, and its `scalbnf`)
//! written without branches: every path is computed and the right one selected, with the
//! same IEEE 754 operations in the same order, so every result is identical. The test below
//! compares the two on a sweep of every float's exponent range and the edge values; a one-off
//! release-build check of all 2^32 bit patterns against `libm::expf` found no difference.
//! We keep libm's own function rather than a faster vector approximation so that the int8
//! scores stay the runtime's exactly.

// libm's constants, by bit pattern (its decimal literals round to these).
/// `ln 2`'s high part (libm's `LN2_HI`, 6.9314575195e-01).
const LN2_HI: f32 = f32::from_bits(0x3f31_7200);
/// `ln 2`'s low part (libm's `LN2_LO`, 1.4286067653e-06).
const LN2_LO: f32 = f32::from_bits(0x35bf_be8e);
/// `1 / ln 2` (libm's `INV_LN2`, 1.4426950216e+00).
const INV_LN2: f32 = f32::from_bits(0x3fb8_aa3b);
/// libm's polynomial coefficients (1.6666625440e-1, -2.7667332906e-3).
const P1: f32 = f32::from_bits(0x3e2a_aa8f);
const P2: f32 = f32::from_bits(0xbb35_5215);

/// `libm::expf(x)`, bit for bit, without branches (see the module docs).
#[inline(always)]
pub(crate) fn expf(x: f32) -> f32 {
    let bits = x.to_bits();
    let neg = bits >> 31 != 0;
    let hx = bits & 0x7fff_ffff;
    // Argument reduction: `k` such that `x = k ln2 + r`, `|r| ≤ ln2 / 2`. Every `x` that
    // reaches the general path gives `|k| ≤ 150`; the clamp only keeps the other lanes' `k`
    // (selected away below) from overflowing the exponent arithmetic.
    let far = ((INV_LN2 * x + if neg { -0.5 } else { 0.5 }) as i32).clamp(-200, 200);
    let near = if neg { -1 } else { 1 };
    let k = if hx > 0x3f85_1592 {
        far
    } else if hx > 0x3eb1_7218 {
        near
    } else {
        0
    };
    let kf = k as f32;
    let hi = x - kf * LN2_HI;
    let lo = kf * LN2_LO;
    let r = hi - lo;
    let rr = r * r;
    let c = r - rr * (P1 + rr * P2);
    let y = 1.0 + (r * c / (2.0 - c) - lo + hi);
    // libm's `scalbnf(y, k)`: at most one prescaling multiply for these `k`, then `2^n`.
    let (pre, n) = if k > 127 {
        (f32::from_bits(0x7f00_0000), k - 127)
    } else if k < -126 {
        // 2^-126 · 2^24, as libm.
        (f32::from_bits(0x0c80_0000), k + 102)
    } else {
        (1.0, k)
    };
    let scaled = (y * pre) * f32::from_bits(((127 + n) as u32) << 23);
    if hx > 0x7f80_0000 {
        x
    } else if hx >= 0x42b1_7218 && !neg {
        x * f32::from_bits(0x7f00_0000)
    } else if neg && hx >= 0x42cf_f1b5 {
        0.0
    } else if hx <= 0x3900_0000 {
        1.0 + x
    } else {
        scaled
    }
}

/// The runtime's one-vs-rest probabilities on every `width`-long row of `scores`, in place,
/// through the runtime's own functions (so the results are its bit for bit): `one_vs_rest`,
/// and `softmax` for a row whose scores are all below −80, as `Model::infer` does. Rows of this
/// output are rare enough in a batch's time (scikit-learn's one-vs-rest models) that the
/// scalar path is kept.
pub(crate) fn one_vs_rest_rows(scores: &mut [f32], width: usize) {
    use kinglet_runtime::unstable::output::{one_vs_rest, softmax};
    if width == 0 {
        return;
    }
    for row in scores.chunks_exact_mut(width) {
        if !one_vs_rest(row) {
            softmax(row);
        }
    }
}

/// The runtime's `softmax` on every `width`-long row of `scores`, in place: the same maximum,
/// the same `expf` (above), the same sums and products in the same order.
#[inline(always)]
pub(crate) fn softmax_rows(scores: &mut [f32], width: usize) {
    if width == 0 {
        return;
    }
    let mut max = Vec::with_capacity(scores.len() / width);
    for row in scores.chunks_exact_mut(width) {
        let mut m = f32::NEG_INFINITY;
        for &s in row.iter() {
            if s > m {
                m = s;
            }
        }
        for s in row.iter_mut() {
            *s -= m;
        }
        max.push(m);
    }
    for s in scores.iter_mut() {
        *s = expf(*s);
    }
    for row in scores.chunks_exact_mut(width) {
        let mut sum = 0.0f32;
        for &s in row.iter() {
            sum += s;
        }
        if sum > 0.0 {
            let inv = 1.0 / sum;
            for s in row.iter_mut() {
                *s *= inv;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use kinglet_runtime::unstable::output::softmax;

    fn same(x: f32) {
        let (a, b) = (expf(x), libm::expf(x));
        assert!(
            a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
            "expf({x:e}) = {a:e}, libm {b:e}"
        );
    }

    /// Equal to libm's `expf` on every 65,537th bit pattern (every sign and exponent, ~65,000
    /// values), densely on [-110, 90] (every path: the underflow to zero, results below the
    /// normal range, the overflow), and on each threshold of libm's branches and its
    /// neighbours.
    #[test]
    fn expf_is_libms() {
        for b in (0..=u32::MAX).step_by(65_537) {
            same(f32::from_bits(b));
        }
        for i in -2_200_000..=1_800_000 {
            same(i as f32 * 5e-5);
        }
        for t in [
            0x42ae_ac50u32,
            0x42b1_7218,
            0x42cf_f1b5,
            0x3eb1_7218,
            0x3f85_1592,
            0x3900_0000,
            0x7f80_0000,
        ] {
            for d in -3i32..=3 {
                let b = t.wrapping_add_signed(d);
                same(f32::from_bits(b));
                same(f32::from_bits(b | 0x8000_0000));
            }
        }
        for x in [
            0.0,
            -0.0,
            f32::INFINITY,
            f32::NEG_INFINITY,
            f32::NAN,
            f32::MAX,
            f32::MIN,
        ] {
            same(x);
        }
    }

    /// Rows of scores (large, tied, negative, infinite, NaN) give the runtime's softmax.
    #[test]
    fn softmax_rows_is_the_runtimes() {
        let rows: [[f32; 4]; 6] = [
            [0.0, 1.0, 2.0, 3.0],
            [-50.0, -50.0, 10.0, 10.0],
            [100.0, -100.0, 0.5, 88.0],
            [f32::INFINITY, 1.0, 0.0, -1.0],
            [f32::NAN, 1.0, 2.0, 0.0],
            [-3e38, 3e38, 0.0, -0.0],
        ];
        let mut got: Vec<f32> = rows.iter().flatten().copied().collect();
        softmax_rows(&mut got, 4);
        for (g, r) in got.chunks_exact(4).zip(rows) {
            let mut want = r;
            softmax(&mut want);
            let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(g), bits(&want), "{r:?}");
        }
    }
}
