//! Pointwise activations between dense layers other than the fused ReLU (`FORMAT.md` §3.3):
//! the kinds, their parameters and their f32 formulas (libm); an int8 layer's table is looked up
//! by the kernels' store (`dense::store_i8`).
//!
//! An f32 layer stores the kind and its f32 parameters and computes the formula after the
//! affine map. An int8 layer stores the kind and a 256-entry table: its requantised output is
//! one of 256 values, so the activation of each was computed at pack time,
//! `table[q + 128] = quantise(f(dequantise(q)))`, and the device only looks values up.

/// Number of pointwise kinds: a kind byte at or above this is rejected.
pub const KINDS: u8 = 11;

/// Entries of an int8 layer's table: one per int8 value, in the order −128 to 127.
pub const TABLE_LEN: usize = 256;

/// A pointwise activation kind, as its byte in the blob.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[repr(u8)]
pub enum Kind {
    /// `tanh x` (ONNX `Tanh`).
    Tanh = 0,
    /// `1 / (1 + e^−x)` (ONNX `Sigmoid`).
    Sigmoid = 1,
    /// `x` for `x ≥ 0`, else `alpha · x` (ONNX `LeakyRelu`); one parameter, alpha.
    LeakyRelu = 2,
    /// `min(max(x, lo), hi)` (ONNX `Clip`; ReLU6 is `lo = 0, hi = 6`); parameters lo, hi.
    Clip = 3,
    /// `max(0, min(1, alpha · x + beta))` (ONNX `HardSigmoid`); parameters alpha, beta.
    HardSigmoid = 4,
    /// `x · max(0, min(1, x / 6 + 1/2))` (ONNX `HardSwish`).
    HardSwish = 5,
    /// `x` for `x ≥ 0`, else `alpha · (e^x − 1)` (ONNX `Elu`); one parameter, alpha.
    Elu = 6,
    /// `gamma · x` for `x > 0`, else `gamma · alpha · (e^x − 1)` (ONNX `Selu`); alpha, gamma.
    Selu = 7,
    /// `ln(1 + e^x)` (ONNX `Softplus`).
    Softplus = 8,
    /// `x/2 · (1 + erf(x / √2))` (ONNX `Gelu`, `approximate = "none"`).
    Gelu = 9,
    /// `x/2 · (1 + tanh(√(2/π) · (x + 0.044715 x³)))` (ONNX `Gelu`, `approximate = "tanh"`).
    GeluTanh = 10,
}

impl Kind {
    /// The kind of a blob's kind byte; `None` for an unknown byte.
    pub const fn from_byte(b: u8) -> Option<Kind> {
        Some(match b {
            0 => Kind::Tanh,
            1 => Kind::Sigmoid,
            2 => Kind::LeakyRelu,
            3 => Kind::Clip,
            4 => Kind::HardSigmoid,
            5 => Kind::HardSwish,
            6 => Kind::Elu,
            7 => Kind::Selu,
            8 => Kind::Softplus,
            9 => Kind::Gelu,
            10 => Kind::GeluTanh,
            _ => return None,
        })
    }

    /// Number of f32 parameters an f32 layer stores for this kind.
    pub const fn params(self) -> usize {
        match self {
            Kind::LeakyRelu | Kind::Elu => 1,
            Kind::Clip | Kind::HardSigmoid | Kind::Selu => 2,
            _ => 0,
        }
    }

    /// A short name, for reports.
    pub const fn name(self) -> &'static str {
        match self {
            Kind::Tanh => "tanh",
            Kind::Sigmoid => "sigmoid",
            Kind::LeakyRelu => "leaky_relu",
            Kind::Clip => "clip",
            Kind::HardSigmoid => "hard_sigmoid",
            Kind::HardSwish => "hard_swish",
            Kind::Elu => "elu",
            Kind::Selu => "selu",
            Kind::Softplus => "softplus",
            Kind::Gelu => "gelu",
            Kind::GeluTanh => "gelu_tanh",
        }
    }
}

/// The name of a layer's activation, for reports: `linear`, `relu` or the pointwise kind's.
pub fn activation_name(l: &crate::unstable::wire::format::LayerDesc<'_>) -> &'static str {
    match l.pointwise() {
        Some(p) => Kind::from_byte(p.kind).map_or("unknown", Kind::name),
        None if l.activation == crate::Activation::Relu => "relu",
        None => "linear",
    }
}

/// A kind with its parameters (unused ones 0), as the converter and an f32 layer hold it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pointwise {
    /// Which function.
    pub kind: Kind,
    /// Its parameters in the order [`Kind`] lists them; unused entries are 0.
    pub params: [f32; 2],
}

#[cfg(feature = "f32")]
impl Pointwise {
    /// Whether the parameters are ones a reader accepts: finite, and for `Clip` `lo ≤ hi`.
    pub fn params_ok(&self) -> bool {
        let [a, b] = self.params;
        a.is_finite() && b.is_finite() && (self.kind != Kind::Clip || a <= b)
    }

    /// Decodes an f32 layer's parameter bytes (`4 · kind.params()` little-endian f32);
    /// `None` if the length is wrong.
    pub fn from_params(kind: Kind, bytes: &[u8]) -> Option<Pointwise> {
        if bytes.len() != 4 * kind.params() {
            return None;
        }
        let mut params = [0f32; 2];
        for (p, v) in params.iter_mut().zip(crate::le::f32s(bytes)) {
            *p = v;
        }
        Some(Pointwise { kind, params })
    }

    /// The function at `x`, in f32 with libm.
    pub fn eval(&self, x: f32) -> f32 {
        let [a, b] = self.params;
        match self.kind {
            Kind::Tanh => libm::tanhf(x),
            Kind::Sigmoid => crate::output::sigmoid(x),
            Kind::LeakyRelu => {
                if x >= 0.0 {
                    x
                } else {
                    a * x
                }
            }
            Kind::Clip => min(max(x, a), b),
            Kind::HardSigmoid => min(max(a * x + b, 0.0), 1.0),
            Kind::HardSwish => x * min(max(x * (1.0 / 6.0) + 0.5, 0.0), 1.0),
            Kind::Elu => {
                if x >= 0.0 {
                    x
                } else {
                    a * libm::expm1f(x)
                }
            }
            Kind::Selu => {
                if x > 0.0 {
                    b * x
                } else {
                    b * (a * libm::expm1f(x))
                }
            }
            // ln(1 + e^x) = max(x, 0) + ln(1 + e^−|x|): no overflow for large x.
            Kind::Softplus => max(x, 0.0) + libm::log1pf(libm::expf(-libm::fabsf(x))),
            Kind::Gelu => 0.5 * x * (1.0 + libm::erff(x * core::f32::consts::FRAC_1_SQRT_2)),
            Kind::GeluTanh => {
                // √(2/π)
                const C: f32 = 0.797_884_6;
                0.5 * x * (1.0 + libm::tanhf(C * (x + 0.044_715 * x * x * x)))
            }
        }
    }
}

/// `a` if `a > b` else `b` (no `fmaxf` call on cores without `VMAXNM`; inputs are not NaN).
#[cfg(feature = "f32")]
fn max(a: f32, b: f32) -> f32 {
    if a > b {
        a
    } else {
        b
    }
}

#[cfg(feature = "f32")]
fn min(a: f32, b: f32) -> f32 {
    if a < b {
        a
    } else {
        b
    }
}

/// Applies an f32 layer's activation in place to little-endian f32 values.
#[cfg(feature = "f32")]
pub fn apply_f32(values: &mut [u8], p: &Pointwise) {
    for i in 0..values.len() / 4 {
        if let Some(x) = crate::le::f32_at(values, i) {
            crate::le::put_f32(values, i, p.eval(x));
        }
    }
}

#[cfg(all(test, feature = "f32"))]
mod tests {
    use super::*;

    #[test]
    fn kind_bytes_round_trip() {
        for b in 0..=255u8 {
            match Kind::from_byte(b) {
                Some(k) => assert_eq!(k as u8, b),
                None => assert!(b >= KINDS),
            }
        }
    }

    /// Values by hand from the ONNX operator definitions (onnx/docs/Operators.md).
    #[test]
    fn formulas_hand_worked() {
        let p = |kind, a, b| Pointwise {
            kind,
            params: [a, b],
        };
        let close = |x: f32, y: f32| (x - y).abs() < 1e-6;
        assert!(close(p(Kind::LeakyRelu, 0.1, 0.0).eval(-2.0), -0.2));
        assert!(close(p(Kind::Clip, 0.0, 6.0).eval(7.5), 6.0));
        assert!(close(p(Kind::Clip, 0.0, 6.0).eval(-1.0), 0.0));
        assert!(close(p(Kind::HardSigmoid, 0.2, 0.5).eval(1.0), 0.7));
        assert!(close(
            p(Kind::HardSwish, 0.0, 0.0).eval(1.0),
            1.0 * (1.0 / 6.0 + 0.5)
        ));
        assert!(close(p(Kind::HardSwish, 0.0, 0.0).eval(4.0), 4.0));
        // e^-1 - 1 = -0.632120559
        assert!(close(p(Kind::Elu, 1.0, 0.0).eval(-1.0), -0.632_120_56));
        // ln 2 = 0.693147181; ln(1 + e^100) = 100 (to f32)
        assert!(close(
            p(Kind::Softplus, 0.0, 0.0).eval(0.0),
            core::f32::consts::LN_2
        ));
        assert!(close(p(Kind::Softplus, 0.0, 0.0).eval(100.0), 100.0));
        // erf(1/√2) = 0.682689492 → Gelu(1) = 0.841344746
        assert!(close(p(Kind::Gelu, 0.0, 0.0).eval(1.0), 0.841_344_7));
        assert!(!p(Kind::Clip, 1.0, 0.0).params_ok());
        assert!(!p(Kind::Elu, f32::NAN, 0.0).params_ok());
    }

    #[test]
    fn table_is_indexed_from_minus_128() {
        let mut t = [0u8; TABLE_LEN];
        for (i, e) in t.iter_mut().enumerate() {
            *e = (255 - i) as u8;
        }
        let v = [-128i8, 0, 127].map(|q| crate::unstable::dense::store_i8(Some(&t), q));
        assert_eq!(v, [255, 127, 0]);
        assert_eq!(crate::unstable::dense::store_i8(None, -1), 255);
    }
}
