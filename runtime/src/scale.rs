//! The first step of a sample: the saved input scaler, and quantisation of the input to int8.
//!
//! Float inputs go through the scaler `(x - offset) * scale` in f32 and, for int8 models,
//! through [`quantize_linear`] (ONNX `QuantizeLinear` semantics). Integer inputs (`i16` sensor
//! counts, `u8` pixels) on an int8 model take [`quantise_integer`] instead: a per-feature
//! fixed-point map derived by the converter from the same scaler, with no float at all, so a
//! board without an FPU keeps float out of the hot path.
use crate::error::RunError;
use crate::le;
use crate::wire::format::{InputQuantDesc, ScalerDesc};

/// Quantises `x` to int8 as ONNX `QuantizeLinear` does: `saturate(round_half_even(x / scale) +
/// zero_point)`, computed in f32 (onnx.ai operator documentation, QuantizeLinear).
///
/// Rounding uses the IEEE-754 round-to-nearest-even addition itself: for `|y| < 2^22`, adding and
/// subtracting `1.5 · 2^23` leaves `y` rounded to an integer with ties to even (the sum lies in
/// `[2^23, 2^24)`, where one unit in the last place is 1). For larger `|y|` the result is within
/// one unit of `y` and saturates, as it must. This is two additions instead of a software
/// `rintf`, and gives the same result on every target. The zero point is added and the result
/// clamped in integers (`SSAT` on Cortex-M4). A NaN (which [`crate::Model::infer`] never passes:
/// it rejects non-finite features) maps to the zero point.
#[inline]
pub fn quantize_linear(x: f32, scale: f32, zero_point: i8) -> i8 {
    const ROUND: f32 = 12_582_912.0; // 1.5 · 2^23
    let r = (x / scale + ROUND) - ROUND;
    // `as` saturates; below -256 or above 255 the sum saturates whatever the zero point.
    ((r as i32).clamp(-256, 255) + i32::from(zero_point)).clamp(-128, 127) as i8
}

/// Quantises `x` to a symmetric int16 (`FORMAT.md` §3.6): `saturate(round_half_even(x /
/// scale))` to `[-32768, 32767]`, computed in f32 with the rounding of [`quantize_linear`]
/// (exact for `|x / scale| < 2^22`, far beyond the range it saturates at).
#[inline]
pub fn quantize_linear_i16(x: f32, scale: f32) -> i16 {
    const ROUND: f32 = 12_582_912.0; // 1.5 · 2^23
    let r = (x / scale + ROUND) - ROUND;
    (r as i32).clamp(-32_768, 32_767) as i16
}

/// Scales (saved scaler) and quantises float features `x` into `dst`, one int8 per feature,
/// exactly as [`quantize_linear`]`((x[i] - offset[i]) * scale[i], ...)`. Stops at the first
/// non-finite feature. One pass, with the uniform and per-feature scalers in separate loops so
/// the per-element work is load, subtract, multiply, divide, round, clamp, store.
pub(crate) fn quantise_floats(
    scaler: Option<ScalerDesc<'_>>,
    q: &InputQuantDesc<'_>,
    x: &[f32],
    dst: &mut [u8],
) -> Result<(), RunError> {
    let (qs, zp) = (q.scale, q.zero_point);
    match scaler {
        Some(s) if s.offset.len() != 4 => {
            // One zipped pass over features, offsets and scales: a single loop counter.
            let per = s
                .offset
                .as_chunks::<4>()
                .0
                .iter()
                .zip(s.scale.as_chunks::<4>().0);
            quantise_each(x, dst, qs, zp, per, |v, (off, sc)| {
                (v - f32::from_le_bytes(*off)) * f32::from_le_bytes(*sc)
            })
        }
        _ => {
            // No scaler is the uniform map (x - 0) · 1, which is x exactly for every finite x
            // (-0.0 included): one loop fewer in flash for two instructions per feature.
            let (off, sc) = scaler.map_or((0.0, 1.0), |s| {
                (
                    le::f32_at(s.offset, 0).unwrap_or(0.0),
                    le::f32_at(s.scale, 0).unwrap_or(1.0),
                )
            });
            quantise_each(x, dst, qs, zp, core::iter::repeat(()), |v, ()| {
                (v - off) * sc
            })
        }
    }
}

/// [`quantise_floats`] for an int16 input tensor: two little-endian bytes per feature,
/// [`quantize_linear_i16`] of the scaled value.
#[cfg(feature = "int16-input")]
pub(crate) fn quantise_floats_i16(
    scaler: Option<ScalerDesc<'_>>,
    q: &InputQuantDesc<'_>,
    x: &[f32],
    dst: &mut [u8],
) -> Result<(), RunError> {
    let scaler = Scaler::new(scaler);
    let out = dst.as_chunks_mut::<2>().0.iter_mut();
    for (i, (d, &v)) in out.zip(x).enumerate() {
        if !v.is_finite() {
            return Err(RunError::NonFiniteInput { index: i as u32 });
        }
        *d = quantize_linear_i16(scaler.apply(i, v), q.scale).to_le_bytes();
    }
    Ok(())
}

/// The loop of [`quantise_floats`] for one scaler shape: `map(x, param)` is the scaled value.
#[inline(always)]
fn quantise_each<P>(
    x: &[f32],
    dst: &mut [u8],
    scale: f32,
    zero_point: i8,
    params: impl Iterator<Item = P>,
    map: impl Fn(f32, P) -> f32,
) -> Result<(), RunError> {
    for (i, ((d, &v), p)) in dst.iter_mut().zip(x).zip(params).enumerate() {
        if !v.is_finite() {
            return Err(RunError::NonFiniteInput { index: i as u32 });
        }
        *d = quantize_linear(map(v, p), scale, zero_point) as u8;
    }
    Ok(())
}

/// Integer-only input quantisation: `saturate((x * mult + add + 2^(shift-1)) >> shift)`
/// (round half up). `|add| <= 2^62` and `shift <= 62` are guaranteed by validation, and
/// `|x * mult| < 2^63 - 2^62` holds for every `x` of 16 bits or fewer.
#[inline]
pub fn quantise_integer(x: i32, mult: i32, add: i64, shift: u8) -> i8 {
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

/// [`quantise_integer`] for an int16 input tensor: the same map, saturated to
/// `[-32768, 32767]`. (Written out again rather than shared: a shared helper changed the int8
/// path's code generation on Cortex-M, about 30 instructions more per feature on the M0.)
#[inline]
pub fn quantise_integer_i16(x: i32, mult: i32, add: i64, shift: u8) -> i16 {
    let x = i64::from(x.clamp(-(1 << 16), 1 << 16));
    let t = x * i64::from(mult) + add;
    let r = if shift == 0 {
        t
    } else {
        let s = u32::from(shift.min(62));
        (t + (1i64 << (s - 1))) >> s
    };
    r.clamp(-32_768, 32_767) as i16
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

/// Integer input tables, uniform or per feature. Always inlined: with the int16 input stage
/// as a second caller the compiler called it out of line, a tuple through the stack per
/// feature (about 14 instructions more per feature on the Cortex-M4, 32 on the M0).
#[inline(always)]
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

    /// The float-clamp formula `quantize_linear` had before the integer clamp: the same byte
    /// for every finite input.
    fn float_clamp(x: f32, scale: f32, zero_point: i8) -> i8 {
        let y = x / scale;
        let r = if y.abs() < 4_194_304.0 {
            (y + 12_582_912.0) - 12_582_912.0
        } else {
            y
        };
        (r + f32::from(zero_point)).clamp(-128.0, 127.0) as i8
    }

    #[test]
    fn integer_clamp_matches_float_clamp() {
        // xorshift32 (Marsaglia, 2003), seeded.
        let mut state = 0x5eed_u32;
        let mut next_u32 = || {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            state
        };
        let zps = [-128i8, -77, -1, 0, 1, 64, 127];
        let specials = [
            0.0f32,
            -0.0,
            0.5,
            127.5,
            128.5,
            -128.5,
            -129.5,
            255.5,
            256.5,
            -256.5,
            383.5,
            4_194_303.5,
            4_194_304.0,
            -4_194_304.0,
            8_388_608.0,
            -12_582_912.0,
            3e38,
            -3e38,
            f32::INFINITY,
            f32::NEG_INFINITY,
            f32::MIN_POSITIVE,
            1e-45,
        ];
        for &zp in &zps {
            for &x in &specials {
                assert_eq!(
                    quantize_linear(x, 1.0, zp),
                    float_clamp(x, 1.0, zp),
                    "x {x}"
                );
            }
            // A sample under Miri (scripts/miri.sh), where the full sweep takes minutes.
            for _ in 0..if cfg!(miri) { 300 } else { 20_000 } {
                let x = f32::from_bits(next_u32());
                let scale = f32::from_bits(0x3000_0000 + (next_u32() >> 6));
                if x.is_finite() {
                    assert_eq!(
                        quantize_linear(x, scale, zp),
                        float_clamp(x, scale, zp),
                        "x {x} scale {scale} zp {zp}"
                    );
                }
                let near = (next_u32() % 1200) as f32 * 0.5 - 600.0;
                assert_eq!(quantize_linear(near, 1.0, zp), float_clamp(near, 1.0, zp));
            }
        }
    }

    #[test]
    fn quantise_floats_is_scaler_then_quantize_linear() {
        let q_tables = (vec![0u8; 4], vec![0u8; 8], vec![0u8]);
        let q = InputQuantDesc {
            width: crate::wire::format::InputWidth::I8,
            scale: 0.037,
            zero_point: -5,
            int_mult: &q_tables.0,
            int_add: &q_tables.1,
            int_shift: &q_tables.2,
        };
        let x: Vec<f32> = (0..37).map(|i| (i as f32 - 11.3) * 0.77).collect();
        let per_off: Vec<u8> = (0..37)
            .flat_map(|i| (i as f32 * 0.1).to_le_bytes())
            .collect();
        let per_sc: Vec<u8> = (0..37)
            .flat_map(|i| (0.5 + i as f32 * 0.03).to_le_bytes())
            .collect();
        let (one_off, one_sc) = (1.5f32.to_le_bytes(), 0.25f32.to_le_bytes());
        let scalers = [
            None,
            Some(ScalerDesc {
                offset: &one_off,
                scale: &one_sc,
            }),
            Some(ScalerDesc {
                offset: &per_off,
                scale: &per_sc,
            }),
        ];
        for scaler in scalers {
            let mut got = vec![0u8; x.len()];
            quantise_floats(scaler, &q, &x, &mut got).unwrap();
            let s = Scaler::new(scaler);
            let want: Vec<u8> = x
                .iter()
                .enumerate()
                .map(|(i, &v)| quantize_linear(s.apply(i, v), q.scale, q.zero_point) as u8)
                .collect();
            assert_eq!(got, want);
            let mut bad = x.clone();
            bad[20] = f32::NAN;
            assert_eq!(
                quantise_floats(scaler, &q, &bad, &mut got),
                Err(RunError::NonFiniteInput { index: 20 })
            );
        }
    }

    #[test]
    fn integer_path_hand_worked() {
        // pixel / 255 quantised with scale 1/255, zero point -128: q = x - 128.
        // mult = 1 << 20, add = -128 << 20, shift 20.
        assert_eq!(quantise_integer(0, 1 << 20, -128 << 20, 20), -128);
        assert_eq!(quantise_integer(255, 1 << 20, -128 << 20, 20), 127);
        assert_eq!(quantise_integer(300, 1 << 20, -128 << 20, 20), 127);
        // Half up: 3 * 0.5 = 1.5 → 2, -3 * 0.5 = -1.5 → -1.
        assert_eq!(quantise_integer(3, 1, 0, 1), 2);
        assert_eq!(quantise_integer(-3, 1, 0, 1), -1);
        assert_eq!(quantise_integer(i32::MAX, i32::MAX, 1 << 62, 0), 127);
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
