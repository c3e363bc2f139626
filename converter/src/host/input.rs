//! The input stage of the batched passes: the saved scaler and the int8 input quantisation,
//! over whole rows in loops the compiler vectorises, with the runtime's results bit for bit.
use kinglet_runtime::unstable::scale::quantise_integer;
use kinglet_runtime::RunError;

/// `1.5 · 2^23`, the rounding constant of the runtime's `quantize_linear`.
const ROUND: f32 = 12_582_912.0;
/// Its bit pattern.
const ROUND_BITS: i32 = 0x4B40_0000;

/// Whether every value is finite, in one pass without an early exit (so that it vectorises):
/// a value is not finite when its exponent bits are all ones.
#[inline(always)]
pub(crate) fn all_finite(x: &[f32]) -> bool {
    x.iter().fold(0u32, |acc, v| {
        acc | u32::from(v.to_bits() & 0x7f80_0000 == 0x7f80_0000)
    }) == 0
}

/// The runtime's `quantize_linear(y, scale, zero_point)` for every `y` (NaN and infinities
/// included), in a form without a float-to-integer conversion, so that it vectorises:
///
/// - the runtime rounds `y / scale` by adding and subtracting `ROUND`; for `|y / scale| ≤ 512`
///   the sum lies in `[2^23, 2^24)`, where consecutive floats are one apart, so the rounded
///   integer is the sum's bit pattern minus `ROUND`'s, with the same tie to even;
/// - beyond ±512 (or at ±∞) both the runtime's value and ±512 saturate to the same end of the
///   int8 range once the zero point (`|zp| ≤ 128`) is added, so the quotient is clamped first;
/// - a NaN quotient is 0 in the runtime (`NaN as i32`), and here.
///
/// `converter/tests/batched_vs_runtime.rs` and the test below check the equality.
#[inline(always)]
pub(crate) fn quantise(y: f32, scale: f32, zero_point: i32) -> i8 {
    let q = y / scale;
    let c = q.clamp(-512.0, 512.0);
    let c = if q.is_nan() { 0.0 } else { c };
    let r = ((c + ROUND).to_bits() as i32) - ROUND_BITS;
    (r + zero_point).clamp(-128, 127) as i8
}

/// How the int8 pass's first product takes a quantised input value: as f32 (the portable
/// product) or as the unsigned byte `q ^ 0x80` (`host::vnni`).
pub(crate) trait Lane: Copy + Default {
    /// `q` in this form.
    fn of(q: i8) -> Self;
}

impl Lane for f32 {
    #[inline(always)]
    fn of(q: i8) -> f32 {
        f32::from(q)
    }
}

impl Lane for u8 {
    #[inline(always)]
    fn of(q: i8) -> u8 {
        q as u8 ^ 0x80
    }
}

/// The int8 input quantisation of a blob, per feature.
#[derive(Debug, Clone)]
pub(crate) struct InputQuant {
    /// Scaler offset and scale per feature (`0` and `1` without a scaler).
    pub offset: Vec<f32>,
    pub scale: Vec<f32>,
    pub quant_scale: f32,
    pub zero_point: i8,
    /// Integer paths: multiplier, addend, shift per feature; empty without them.
    pub integer: Vec<(i32, i64, u8)>,
}

impl InputQuant {
    /// Quantises one row of floats into `dst` (and its values as [`Lane`]s into `wide`), as the
    /// runtime's input stage: the first non-finite feature is refused.
    #[inline(always)]
    pub(crate) fn floats<L: Lane>(
        &self,
        v: &[f32],
        dst: &mut [i8],
        wide: &mut [L],
    ) -> Result<(), RunError> {
        let (qs, zp) = (self.quant_scale, i32::from(self.zero_point));
        let params = self.offset.iter().zip(&self.scale);
        // The finiteness check rides along (exponent bits all ones), so the row is read once;
        // a refused row's outputs are left half written, as the caller drops them.
        let mut bad = 0u32;
        for (((d, w), &x), (off, sc)) in dst.iter_mut().zip(wide.iter_mut()).zip(v).zip(params) {
            bad |= u32::from(x.to_bits() & 0x7f80_0000 == 0x7f80_0000);
            let q = quantise((x - off) * sc, qs, zp);
            *d = q;
            *w = L::of(q);
        }
        if bad != 0 || v.len() > self.offset.len() && !all_finite(&v[self.offset.len()..]) {
            let i = v.iter().position(|x| !x.is_finite()).unwrap_or(0);
            return Err(RunError::NonFiniteInput { index: i as u32 });
        }
        Ok(())
    }

    /// Quantises one row of integers through the integer input path.
    #[inline(always)]
    pub(crate) fn integers<T: Copy + Into<i32>, L: Lane>(
        &self,
        v: &[T],
        dst: &mut [i8],
        wide: &mut [L],
    ) -> Result<(), RunError> {
        // A blob without the integer input path (version 5, `FORMAT.md` §3.4), as the runtime.
        if self.integer.is_empty() {
            return Err(RunError::NoIntegerInput);
        }
        for ((d, w), (&x, &(m, a, s))) in dst
            .iter_mut()
            .zip(wide.iter_mut())
            .zip(v.iter().zip(&self.integer))
        {
            let q = quantise_integer(x.into(), m, a, s);
            *d = q;
            *w = L::of(q);
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use kinglet_runtime::unstable::scale::quantize_linear;

    /// A row is refused at its first non-finite feature, as the runtime's input stage refuses
    /// it; a finite row is quantised feature by feature.
    #[test]
    fn floats_refuses_the_first_non_finite_feature() {
        let iq = InputQuant {
            offset: vec![1.0; 8],
            scale: vec![0.5; 8],
            quant_scale: 0.25,
            zero_point: -3,
            integer: Vec::new(),
        };
        let (mut dst, mut wide) = ([0i8; 8], [0u8; 8]);
        let mut row = [0.0f32, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0];
        iq.floats(&row, &mut dst, &mut wide).unwrap();
        for (i, (&d, &w)) in dst.iter().zip(&wide).enumerate() {
            let want = quantize_linear((row[i] - 1.0) * 0.5, 0.25, -3);
            assert_eq!((d, w), (want, want as u8 ^ 0x80), "feature {i}");
        }
        for (at, bad) in [(0, f32::NAN), (3, f32::INFINITY), (7, f32::NEG_INFINITY)] {
            let mut r = row;
            r[at] = bad;
            if at < 7 {
                r[7] = f32::NAN;
            }
            assert_eq!(
                iq.floats(&r, &mut dst, &mut wide),
                Err(RunError::NonFiniteInput { index: at as u32 })
            );
        }
        row[2] = f32::MAX;
        assert!(iq.floats(&row, &mut dst, &mut wide).is_ok());
    }

    /// Equal to the runtime's function on ties, both ends, far values, infinities, NaN and a
    /// sweep of quotients, for several zero points and scales.
    #[test]
    fn quantise_is_the_runtimes_quantize_linear() {
        let mut ys = vec![
            0.0,
            -0.0,
            0.5,
            1.5,
            2.5,
            -0.5,
            -1.5,
            -2.5,
            127.5,
            128.5,
            -128.5,
            -129.5,
            255.5,
            256.5,
            -256.5,
            511.5,
            512.0,
            512.5,
            -512.5,
            4.2e6,
            -4.2e6,
            8.4e6,
            1e30,
            -1e30,
            f32::MAX,
            f32::MIN,
            f32::INFINITY,
            f32::NEG_INFINITY,
            f32::NAN,
            f32::MIN_POSITIVE,
        ];
        ys.extend((-3000..3000).map(|i| i as f32 * 0.25 + 0.125));
        ys.extend((-3000..3000).map(|i| i as f32 * 0.37));
        for &scale in &[1.0f32, 0.5, 0.003_921_569, 3.7, 1e-20] {
            for &zp in &[-128i8, -5, 0, 7, 127] {
                for &y in &ys {
                    assert_eq!(
                        quantise(y, scale, i32::from(zp)),
                        quantize_linear(y, scale, zp),
                        "y {y}, scale {scale}, zero point {zp}"
                    );
                }
            }
        }
    }

    #[test]
    fn all_finite_finds_every_kind_of_non_finite_value() {
        assert!(all_finite(&[0.0, -1.0, f32::MAX, f32::MIN_POSITIVE]));
        assert!(all_finite(&[]));
        for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
            assert!(!all_finite(&[1.0, bad, 2.0]));
        }
    }
}
