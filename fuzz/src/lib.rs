//! Shared pieces of the fuzz targets: the invariants an accepted model must keep at inference,
//! the structure-aware mutations of an editable layer table (`kinglet_builder::OwnedModel`, with
//! its raw, non-validating writer), and the base models they start from.
pub mod convert;
pub mod mutate;
pub mod oracle;

use kinglet_builder::sample::{tiny_f32, tiny_int16_input};
use kinglet_builder::Activation;
use kinglet_builder::{le, OwnedInput, OwnedLayer, OwnedModel, OwnedQuant};
use kinglet_runtime::unstable::wire::format::{OutputKind, Precision};

/// Real packed blobs (`kinglet pack` of `examples/vibration` and `examples/digits`): three in
/// format version 1 (output-major weights), two in version 2 (Blocked4x4 weights).
pub const BASE_BLOBS: [&[u8]; 5] = [
    include_bytes!("../bases/vib.int8.kgl"),
    include_bytes!("../bases/vib.f32.kgl"),
    include_bytes!("../bases/digits.int8.kgl"),
    include_bytes!("../bases/vib.int8.v2.kgl"),
    include_bytes!("../bases/vib.f32.v2.kgl"),
];

/// A 3 → 4 → 2 int8 softmax model with labels and a per-feature scaler.
pub fn tiny_int8() -> OwnedModel {
    let q = |n: usize, shift: i8| {
        OwnedQuant::new(&vec![0.01; n], &vec![1 << 30; n], &vec![shift; n], 0.1, -5)
    };
    OwnedModel {
        input_len: 3,
        precision: Precision::Int8,
        scaler: Some((le::f32s(&[0.0, 1.0, 2.0]), le::f32s(&[1.0, 0.5, 0.25]))),
        input_quant: Some(OwnedInput::new(
            0.1,
            -10,
            &[10 << 16, 5 << 16, (5 << 16) / 2],
            &[-10 << 16, -15 << 16, -15 << 16],
            &[16, 16, 16],
        )),
        layers: vec![
            OwnedLayer::int8(
                3,
                4,
                Activation::Relu,
                &[1, -2, 3, 127, -128, 0, 5, 5, 5, -1, -1, -1],
                &[10, -20, 30, 400],
                q(4, 3),
            ),
            OwnedLayer::int8(
                4,
                2,
                Activation::Linear,
                &[1, 2, 3, 4, -4, -3, -2, -1],
                &[0, 7],
                q(2, 2),
            ),
        ],
        output: OutputKind::Softmax,
        labels: "off\non".into(),
    }
}

/// Base model `i` (wrapping): the real blobs first, then the three synthetic ones (the second is
/// `kinglet_builder::sample::tiny_f32`, a 2 → 3 → 1 f32 sigmoid model; the third
/// `kinglet_builder::sample::tiny_int16_input`, a 3 → 4 → 2 int8 model whose input tensor is
/// int16, format version 7).
pub fn base(i: usize) -> OwnedModel {
    let k = i % BASES;
    match BASE_BLOBS.get(k) {
        Some(blob) => match kinglet_runtime::Model::parse(blob) {
            Ok(m) => OwnedModel::from_desc(m.desc()),
            Err(e) => panic!("base blob {k} no longer parses: {e}"),
        },
        None if k == BASE_BLOBS.len() => tiny_int8(),
        None if k == BASE_BLOBS.len() + 1 => tiny_f32(),
        None => tiny_int16_input(),
    }
}

/// Number of base models.
pub const BASES: usize = BASE_BLOBS.len() + 3;

#[cfg(test)]
mod tests {
    use super::*;
    use arbitrary::Unstructured;
    use kinglet_runtime::unstable::wire::format::InputWidth;
    use kinglet_runtime::Model;

    /// Seeded bytes (xorshift32, Marsaglia 2003) for the mutations.
    fn bytes(seed: u32, len: usize) -> Vec<u8> {
        let mut s = seed.max(1);
        (0..len)
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 17;
                s ^= s << 5;
                s as u8
            })
            .collect()
    }

    /// Format version 7 is reached: from the int16-input base and from the int8 ones (by the
    /// width flip), mutated tables with an int16 input tensor are accepted and run the
    /// oracle's extreme inputs.
    #[test]
    fn mutations_reach_accepted_int16_input_models() {
        let (mut from_base, mut from_flip) = (0, 0);
        for seed in 1..3000u32 {
            let data = bytes(seed, 64);
            let mut u = Unstructured::new(&data);
            let start = (seed as usize) % BASES;
            let mut m = base(start);
            for _ in 0..(seed % 4) {
                if mutate::mutate_once(&mut m, &mut u).is_err() {
                    break;
                }
            }
            let wide = m
                .input_quant
                .as_ref()
                .is_some_and(|q| q.width == InputWidth::I16);
            let blob = kinglet_builder::raw_blob(&m.as_desc(), m.planned_scratch());
            let Ok(model) = Model::parse(&blob) else {
                continue;
            };
            if wide {
                oracle::run_extremes(&model);
                if start == BASES - 1 {
                    from_base += 1;
                } else {
                    from_flip += 1;
                }
            }
        }
        eprintln!(
            "accepted int16-input tables: {from_base} from its base, {from_flip} by the flip"
        );
        assert!(from_base > 20, "{from_base} from the int16-input base");
        assert!(from_flip >= 5, "{from_flip} by the width flip");
    }
}
