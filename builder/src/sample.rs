//! Two small hand-made models whose every number is worked out in the documents: the runtime's
//! unit tests run them, and the fuzz targets start from them.
use crate::Activation;
use kinglet_runtime::unstable::wire::format::{OutputKind, Precision};

use crate::le::f32s;
use crate::owned::{OwnedInput, OwnedLayer, OwnedModel, OwnedQuant};

/// 3 inputs (scaled by `(x − 1) · 0.5`) → 4 ReLU → 2 softmax, int8, labels `off`, `on`: the
/// worked example of `FORMAT.md` §6.
pub fn tiny_int8() -> OwnedModel {
    let half = 1 << 30;
    OwnedModel {
        input_len: 3,
        precision: Precision::Int8,
        scaler: Some((f32s(&[1.0]), f32s(&[0.5]))),
        // q = round(((x - 1) * 0.5) / 0.05) - 10 = 10x - 20 (in fixed point, shift 4)
        input_quant: Some(OwnedInput::new(0.05, -10, &[160], &[-320], &[4])),
        layers: vec![
            OwnedLayer::int8(
                3,
                4,
                Activation::Relu,
                &[1, 2, 3, -4, 5, -6, 7, 8, -9, 10, 11, 12],
                &[10, -20, 30, 400],
                OwnedQuant::new(&[0.01; 4], &[half; 4], &[1; 4], 0.02, -5),
            ),
            OwnedLayer::int8(
                4,
                2,
                Activation::Linear,
                &[10, -20, 30, -40, -50, 60, -70, 80],
                &[-100, 100],
                OwnedQuant::new(&[0.01; 2], &[half + 12345; 2], &[6, 7], 0.1, 2),
            ),
        ],
        output: OutputKind::Softmax,
        labels: "off\non".into(),
    }
}

/// [`tiny_int8`] with an int16 input tensor (format version 7, `FORMAT.md` §3.6): input scale
/// `0.05 / 256`, zero point 0, so every input value is 256 times [`tiny_int8`]'s minus its zero
/// point; layer 1's biases hold `256 · (bias − 10 · Σw)` (the int8 model's zero point −10
/// unfolded, then scaled) and its shifts 8 more (1 → 9), so its accumulators are 256 times
/// the int8 model's and every later tensor is the same.
pub fn tiny_int16_input() -> OwnedModel {
    let mut m = tiny_int8();
    // q = round(((x - 1) * 0.5) / (0.05 / 256)) = 2560x - 2560 (fixed point, shift 4).
    let mut q = OwnedInput::new(0.05 / 256.0, 0, &[160 * 256], &[-160 * 256], &[4]);
    q.width = kinglet_runtime::unstable::wire::format::InputWidth::I16;
    m.input_quant = Some(q);
    let half = 1 << 30;
    m.layers[0] = OwnedLayer::int8(
        3,
        4,
        Activation::Relu,
        &[1, 2, 3, -4, 5, -6, 7, 8, -9, 10, 11, 12],
        &[-12_800, 7_680, -7_680, 17_920],
        OwnedQuant::new(&[0.01; 4], &[half; 4], &[9; 4], 0.02, -5),
    );
    m
}

/// 2 inputs → 3 ReLU → 1 sigmoid, f32, no scaler: the blob `FORMAT.md` §7 pins byte for byte.
pub fn tiny_f32() -> OwnedModel {
    OwnedModel {
        input_len: 2,
        precision: Precision::F32,
        scaler: None,
        input_quant: None,
        layers: vec![
            OwnedLayer::f32(
                2,
                3,
                Activation::Relu,
                &[1.0, -1.0, 0.5, 0.5, -2.0, 1.0],
                &[0.0, 0.1, 0.2],
            ),
            OwnedLayer::f32(3, 1, Activation::Linear, &[1.0, 2.0, -1.0], &[-0.5]),
        ],
        output: OutputKind::Sigmoid,
        labels: String::new(),
    }
}
