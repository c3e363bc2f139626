//! The first step of a sample: the saved input scaler, and quantisation of the input to int8.
//!
//! Float inputs go through the scaler `(x - offset) * scale` in f32 and, for int8 models,
//! through [`quantize_linear`] (ONNX `QuantizeLinear` semantics). Integer inputs (`i16` sensor
//! counts, `u8` pixels) on an int8 model take [`quantize_integer`] instead: a per-feature
//! fixed-point map derived by the converter from the same scaler, with no float at all, so a
//! board without an FPU keeps float out of the hot path.
use crate::format::{InputQuantDesc, ScalerDesc};
use crate::le;

/// Quantises `x` to int8 as ONNX `QuantizeLinear` does: `saturate(round_half_even(x / scale) +
/// zero_point)`, computed in f32 (onnx.ai operator documentation, QuantizeLinear).
///
/// Rounding uses the IEEE-754 round-to-nearest-even addition itself: for `|y| < 2^22`, adding and
/// subtracting `1.5 · 2^23` leaves `y` rounded to an integer with ties to even (the sum lies in
/// `[2^23, 2^24)`, where one unit in the last place is 1). Larger magnitudes saturate anyway. This
/// is two additions instead of a software `rintf`, and gives the same result on every target.
#[inline]
pub fn quantize_linear(x: f32, scale: f32, zero_point: i8) -> i8 {
    const ROUND: f32 = 12_582_912.0; // 1.5 · 2^23
    let y = x / scale;
    let r = if y.abs() < 4_194_304.0 {
        (y + ROUND) - ROUND
    } else {
        y
    };
    // `as` saturates (and maps NaN to 0); the clamp makes the intent explicit.
    (r + f32::from(zero_point)).clamp(-128.0, 127.0) as i8
}

/// Integer-only input quantisation: `saturate((x * mult + add + 2^(shift-1)) >> shift)`
/// (round half up). `|add| <= 2^62` and `shift <= 62` are guaranteed by validation, and
/// `|x * mult| < 2^63 - 2^62` holds for every `x` of 16 bits or fewer.
#[inline]
pub fn quantize_integer(x: i32, mult: i32, add: i64, shift: u8) -> i8 {
    let x = i64::from(x.clamp(-(1 << 16), 1 << 16));
    let t = x * i64::from(mult) + add;
    let r = if shift == 0 {
        t
    } else {
        let s = u32::from(shift.min(62));
        (t + (1i64 << (s - 1))) >> s
    };
    r.clamp(-128, 127) as i8
}

/// The float scaler, with uniform (length-1) or per-feature tensors.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Scaler<'a> {
    desc: Option<ScalerDesc<'a>>,
}

impl<'a> Scaler<'a> {
    pub(crate) fn new(desc: Option<ScalerDesc<'a>>) -> Self {
        Scaler { desc }
    }

    /// Scales feature `i`.
    #[inline]
    pub(crate) fn apply(&self, i: usize, x: f32) -> f32 {
        match &self.desc {
            None => x,
            Some(d) => {
                let j = if d.offset.len() == 4 { 0 } else { i };
                let off = le::f32_at(d.offset, j).unwrap_or(0.0);
                let sc = le::f32_at(d.scale, j).unwrap_or(1.0);
                (x - off) * sc
            }
        }
    }
}

/// Integer input tables, uniform or per feature.
pub(crate) fn integer_params(q: &InputQuantDesc<'_>, i: usize) -> (i32, i64, u8) {
    let j = if q.int_shift.len() == 1 { 0 } else { i };
    (
        le::i32_at(q.int_mult, j).unwrap_or(0),
        le::i64_at(q.int_add, j).unwrap_or(0),
        q.int_shift.get(j).copied().unwrap_or(0),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantize_linear_rounds_half_to_even_and_saturates() {
        // Ties go to even, as numpy.rint and QuantizeLinear do.
        assert_eq!(quantize_linear(0.5, 1.0, 0), 0);
        assert_eq!(quantize_linear(1.5, 1.0, 0), 2);
        assert_eq!(quantize_linear(2.5, 1.0, 0), 2);
        assert_eq!(quantize_linear(-2.5, 1.0, 0), -2);
        assert_eq!(quantize_linear(1.0, 0.5, -3), -1);
        assert_eq!(quantize_linear(1e9, 0.1, 0), 127);
        assert_eq!(quantize_linear(-1e9, 0.1, 5), -128);
        assert_eq!(quantize_linear(f32::INFINITY, 1.0, 0), 127);
        // Around the 2^22 switch-over and for values that are already integers.
        assert_eq!(quantize_linear(4_194_303.5, 1.0, -128), 127);
        assert_eq!(quantize_linear(-4_194_304.0, 1.0, 127), -128);
        assert_eq!(quantize_linear(-0.5, 1.0, 0), 0);
        assert_eq!(quantize_linear(-1.5, 1.0, 0), -2);
        assert_eq!(quantize_linear(126.5, 1.0, 0), 126);
        // Agrees with libm's rintf on a sweep of halves and near-halves.
        for k in -600..600 {
            for d in [0.5f32, 0.499_999_97, 0.500_000_06, 0.25, 0.0] {
                let y = k as f32 * 0.1 + d;
                let want = (libm::rintf(y)).clamp(-128.0, 127.0) as i8;
                assert_eq!(quantize_linear(y, 1.0, 0), want, "y = {y}");
            }
        }
    }

    #[test]
    fn integer_path_hand_worked() {
        // pixel / 255 quantised with scale 1/255, zero point -128: q = x - 128.
        // mult = 1 << 20, add = -128 << 20, shift 20.
        assert_eq!(quantize_integer(0, 1 << 20, -128 << 20, 20), -128);
        assert_eq!(quantize_integer(255, 1 << 20, -128 << 20, 20), 127);
        assert_eq!(quantize_integer(300, 1 << 20, -128 << 20, 20), 127);
        // Half up: 3 * 0.5 = 1.5 → 2, -3 * 0.5 = -1.5 → -1.
        assert_eq!(quantize_integer(3, 1, 0, 1), 2);
        assert_eq!(quantize_integer(-3, 1, 0, 1), -1);
        assert_eq!(quantize_integer(i32::MAX, i32::MAX, 1 << 62, 0), 127);
    }

    #[test]
    fn scaler_uniform_and_per_feature() {
        let off = [1.0f32.to_le_bytes(), 2.0f32.to_le_bytes()].concat();
        let sc = [0.5f32.to_le_bytes(), 4.0f32.to_le_bytes()].concat();
        let s = Scaler::new(Some(ScalerDesc {
            offset: &off,
            scale: &sc,
        }));
        assert_eq!(s.apply(0, 3.0), 1.0);
        assert_eq!(s.apply(1, 3.0), 4.0);
        let one = 255.0f32.recip().to_le_bytes();
        let zero = 0.0f32.to_le_bytes();
        let u = Scaler::new(Some(ScalerDesc {
            offset: &zero,
            scale: &one,
        }));
        assert_eq!(u.apply(7, 255.0), 255.0 * 255.0f32.recip());
        assert_eq!(Scaler::new(None).apply(3, 9.0), 9.0);
    }
}
