//! Quantisation parameters: asymmetric int8 activations, symmetric per-channel weights, and the
//! fixed-point decomposition of real multipliers (Jacob et al., 2018, §2.1–2.2).
use super::weight_bits::WeightBits;

/// Scale and zero point of an int8 tensor: `real = (q - zero_point) * scale`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AffineQuant {
    /// Real value of one quantisation step.
    pub scale: f32,
    /// The int8 value that represents real 0.
    pub zero_point: i8,
}

/// Asymmetric int8 parameters covering `[min, max]`, widened to include 0 so that zero (and
/// so ReLU's clamp and zero padding) is exactly representable (Jacob et al., 2018, §2.1).
pub fn activation_quant(min: f32, max: f32) -> AffineQuant {
    let lo = f64::from(min.min(0.0));
    let mut hi = f64::from(max.max(0.0));
    if hi - lo < 1e-12 {
        hi = lo + 1e-6; // an all-zero tensor: any scale works; keep it finite and positive
    }
    let scale = (hi - lo) / 255.0;
    let zp = (-128.0 - lo / scale).round().clamp(-128.0, 127.0);
    AffineQuant {
        scale: scale as f32,
        zero_point: zp as i8,
    }
}

/// Symmetric per-output-channel weight scale: `max |w| / 127` over the row (1.0 for an all-zero
/// row, whose weights then quantise to 0 whatever the scale).
pub fn weight_scale(row: &[f32]) -> f32 {
    weight_scale_bits(row, WeightBits::Int8)
}

/// [`weight_scale`] for `bits`: `max |w| / q_max` (127 for int8, 7 for int4).
pub fn weight_scale_bits(row: &[f32], bits: WeightBits) -> f32 {
    let m = row.iter().fold(0.0f32, |a, &w| a.max(w.abs()));
    if m > 0.0 {
        m / bits.q_max()
    } else {
        1.0
    }
}

/// Accumulator steps a bias may take: half the int32 range, the other half left for the
/// products (at most `128 · 127 · 16,384` ≈ 2^28 for the widest layer).
pub const BIAS_STEPS: f64 = (1u64 << 30) as f64;

/// The smallest weight scale a row may have, given its bias and the layer's input and output
/// scales: `max(|bias| / (input_scale · 2^30), 2^-31 · output_scale / input_scale)`.
///
/// A row whose weights are tiny next to its bias or its output's step (a unit that training
/// left all but dead: weights near 0, the bias its whole output; a scikit-learn MLP on 784
/// pixels has one) would otherwise need more accumulator steps than an int32 holds for its
/// bias ([`BIAS_STEPS`]), or a requantisation multiplier below the `2^-32` the runtime's shift
/// reaches. At the floor its weights round to (nearly) 0, and what they could add is below one
/// output step (the second term: `inputs · 128 · 127 · 2^-31` steps, 0.006 for 784 inputs) or
/// at most `inputs · 128 · q_max / 2^30` of the bias (the first: 1.2 % for 784 int8 inputs,
/// when every input sits at the end of its range with the same sign).
pub fn scale_floor(bias: f64, input_scale: f32, output_scale: f32) -> f32 {
    let s_in = f64::from(input_scale);
    let by_bias = bias.abs() / (s_in * BIAS_STEPS);
    let by_multiplier = f64::from(output_scale) / (s_in * (1u64 << 31) as f64);
    by_bias.max(by_multiplier) as f32
}

/// Rounds `w / scale` to the nearest int8 (ties to even), clamped to `[-127, 127]`.
pub fn quantise_weight(w: f32, scale: f32) -> i8 {
    quantise_weight_bits(w, scale, WeightBits::Int8)
}

/// [`quantise_weight`] for `bits`: clamped to `[-q_max, q_max]` (`[-7, 7]` for int4).
pub fn quantise_weight_bits(w: f32, scale: f32, bits: WeightBits) -> i8 {
    let q = f64::from(bits.q_max());
    (f64::from(w) / f64::from(scale))
        .round_ties_even()
        .clamp(-q, q) as i8
}

/// Splits a positive real multiplier into the runtime's `(multiplier, shift)`:
/// `real = multiplier · 2^-31 · 2^-shift`, `multiplier ∈ [2^30, 2^31)`, `shift ∈ [-31, 31]`.
/// Returns `None` when `real` is not finite and positive or needs a shift out of range.
pub fn decompose_multiplier(real: f64) -> Option<(i32, i8)> {
    if !(real.is_finite() && real > 0.0) {
        return None;
    }
    let (m, mut e) = libm::frexp(real); // real = m · 2^e, m ∈ [0.5, 1)
    let mut q = (m * (1u64 << 31) as f64).round_ties_even() as i64;
    if q == 1 << 31 {
        q /= 2;
        e += 1;
    }
    let shift = -e;
    if !(-31..=31).contains(&shift) {
        return None;
    }
    Some((q as i32, shift as i8))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_floor_keeps_the_bias_and_the_multiplier_in_range() {
        // Worked by hand: bias 1, input scale 2^-10, output scale 2^-4.
        // By the bias: 1 / (2^-10 · 2^30) = 2^-20; by the multiplier: 2^-4 / (2^-10 · 2^31) = 2^-25.
        let (s_in, s_out) = (2f32.powi(-10), 2f32.powi(-4));
        assert_eq!(scale_floor(1.0, s_in, s_out), 2f32.powi(-20));
        assert_eq!(scale_floor(-1.0, s_in, s_out), 2f32.powi(-20));
        assert_eq!(scale_floor(0.0, s_in, s_out), 2f32.powi(-25));
        for b in [0.0, 1e-6, 3e-3, 1.0, 1e3] {
            let f = f64::from(scale_floor(b, s_in, s_out));
            let steps = b / (f64::from(s_in) * f);
            let real = f64::from(s_in) * f / f64::from(s_out);
            assert!(steps <= BIAS_STEPS * (1.0 + 1e-6), "{b}: {steps}");
            assert!(decompose_multiplier(real).is_some(), "{b}: {real}");
        }
        // An ordinary row is far above the floor: max |w| = 0.5 gives 0.5 / 127.
        assert!(weight_scale(&[0.5, -0.25]) > 1e3 * scale_floor(0.1, s_in, s_out));
    }

    #[test]
    fn activation_ranges_hand_worked() {
        // [0, 2.55] (a ReLU output): scale 0.01, real 0 at -128.
        let q = activation_quant(0.0, 2.55);
        assert!((q.scale - 0.01).abs() < 1e-9);
        assert_eq!(q.zero_point, -128);
        // [-1, 1]: scale 2/255, zero point round(-128 + 127.5) = round(-0.5) = -1 (half away).
        let q = activation_quant(-1.0, 1.0);
        assert_eq!(q.zero_point, -1);
        // An all-positive range is widened to include 0.
        assert_eq!(activation_quant(3.0, 5.0).zero_point, -128);
        assert_eq!(activation_quant(-5.0, -3.0).zero_point, 127);
        assert!(activation_quant(0.0, 0.0).scale > 0.0);
    }

    #[test]
    fn weights_are_symmetric_per_channel() {
        let s = weight_scale(&[0.5, -1.27, 0.0]);
        assert!((s - 0.01).abs() < 1e-9);
        assert_eq!(quantise_weight(-1.27, s), -127);
        assert_eq!(quantise_weight(0.5, s), 50);
        assert_eq!(weight_scale(&[0.0, 0.0]), 1.0);
        assert_eq!(quantise_weight(2.5, 1.0), 2); // ties to even
        assert_eq!(quantise_weight(-3.5, 1.0), -4);
    }

    #[test]
    fn multiplier_decomposition_hand_worked() {
        assert_eq!(decompose_multiplier(0.5), Some((1 << 30, 0)));
        assert_eq!(decompose_multiplier(0.25), Some((1 << 30, 1)));
        assert_eq!(decompose_multiplier(3.0), Some((3 << 29, -2)));
        assert_eq!(decompose_multiplier(0.0), None);
        assert_eq!(decompose_multiplier(f64::NAN), None);
        assert_eq!(decompose_multiplier(1e-12), None); // needs shift 40
                                                       // Just below 1: the mantissa rounds up to 2^31 and is renormalised.
        assert_eq!(decompose_multiplier(1.0 - 1e-12), Some((1 << 30, -1)));
    }
}
