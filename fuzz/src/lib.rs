//! Shared pieces of the fuzz targets: an editable layer table with a raw (non-validating)
//! encoder, the invariants an accepted model must keep at inference, the structure-aware
//! mutations, and the base models they start from.
pub mod convert;
pub mod mutate;
pub mod oracle;
pub mod owned;

use kinglet_runtime::format::{Activation, OutputKind, Precision, WeightLayout};
use owned::{OwnedInput, OwnedLayer, OwnedModel, OwnedQuant};

/// Real packed blobs (`kinglet pack` of `examples/vibration` and `examples/digits`): three in
/// format version 1 (output-major weights), two in version 2 (Blocked4x4 weights).
pub const BASE_BLOBS: [&[u8]; 5] = [
    include_bytes!("../bases/vib.int8.kgl"),
    include_bytes!("../bases/vib.f32.kgl"),
    include_bytes!("../bases/digits.int8.kgl"),
    include_bytes!("../bases/vib.int8.v2.kgl"),
    include_bytes!("../bases/vib.f32.v2.kgl"),
];

fn le<T: Copy, const N: usize>(v: &[T], f: impl Fn(T) -> [u8; N]) -> Vec<u8> {
    v.iter().flat_map(|&x| f(x)).collect()
}

/// A 3 → 4 → 2 int8 softmax model with labels and a per-feature scaler.
pub fn tiny_int8() -> OwnedModel {
    let q = |n: usize, shift: u8| OwnedQuant {
        weight_scale: le(&vec![0.01f32; n], f32::to_le_bytes),
        multiplier: le(&vec![1i32 << 30; n], i32::to_le_bytes),
        shift: vec![shift; n],
        output_scale: 0.1,
        output_zero_point: -5,
    };
    OwnedModel {
        input_len: 3,
        precision: Precision::Int8,
        scaler: Some((
            le(&[0.0f32, 1.0, 2.0], f32::to_le_bytes),
            le(&[1.0f32, 0.5, 0.25], f32::to_le_bytes),
        )),
        input_quant: Some(OwnedInput {
            scale: 0.1,
            zero_point: -10,
            int_mult: le(&[10i32 << 16, 5 << 16, (5 << 16) / 2], i32::to_le_bytes),
            int_add: le(&[-10i64 << 16, -15 << 16, -15 << 16], i64::to_le_bytes),
            int_shift: vec![16, 16, 16],
        }),
        layers: vec![
            OwnedLayer {
                inputs: 3,
                outputs: 4,
                activation: Activation::Relu,
                layout: WeightLayout::OutputMajor,
                weights: le(&[1i8, -2, 3, 127, -128, 0, 5, 5, 5, -1, -1, -1], |x| {
                    [x as u8]
                }),
                bias: le(&[10i32, -20, 30, 400], i32::to_le_bytes),
                quant: Some(q(4, 3)),
            },
            OwnedLayer {
                inputs: 4,
                outputs: 2,
                activation: Activation::Linear,
                layout: WeightLayout::OutputMajor,
                weights: le(&[1i8, 2, 3, 4, -4, -3, -2, -1], |x| [x as u8]),
                bias: le(&[0i32, 7], i32::to_le_bytes),
                quant: Some(q(2, 2)),
            },
        ],
        output: OutputKind::Softmax,
        labels: "off\non".into(),
    }
}

/// A 2 → 3 → 1 f32 sigmoid model.
pub fn tiny_f32() -> OwnedModel {
    OwnedModel {
        input_len: 2,
        precision: Precision::F32,
        scaler: None,
        input_quant: None,
        layers: vec![
            OwnedLayer {
                inputs: 2,
                outputs: 3,
                activation: Activation::Relu,
                layout: WeightLayout::OutputMajor,
                weights: le(&[1.0f32, -1.0, 0.5, 0.5, -2.0, 1.0], f32::to_le_bytes),
                bias: le(&[0.0f32, 0.1, 0.2], f32::to_le_bytes),
                quant: None,
            },
            OwnedLayer {
                inputs: 3,
                outputs: 1,
                activation: Activation::Linear,
                layout: WeightLayout::OutputMajor,
                weights: le(&[1.0f32, 2.0, -1.0], f32::to_le_bytes),
                bias: le(&[-0.5f32], f32::to_le_bytes),
                quant: None,
            },
        ],
        output: OutputKind::Sigmoid,
        labels: String::new(),
    }
}

/// Base model `i` (wrapping): the real blobs first, then the two synthetic ones.
pub fn base(i: usize) -> OwnedModel {
    let n = BASE_BLOBS.len() + 2;
    let k = i % n;
    match BASE_BLOBS.get(k) {
        Some(blob) => match kinglet_runtime::Model::parse(blob) {
            Ok(m) => OwnedModel::from_desc(m.desc()),
            Err(e) => panic!("base blob {k} no longer parses: {e}"),
        },
        None if k == BASE_BLOBS.len() => tiny_int8(),
        None => tiny_f32(),
    }
}

/// Number of base models.
pub const BASES: usize = BASE_BLOBS.len() + 2;
