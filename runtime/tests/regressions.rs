//! Regression tests for faults found by fuzzing (`fuzz/`, see `docs/bad-inputs.md`). Each test
//! names the target that found it.
mod common;

use common::{int8_layer, int8_model, quant};
use kinglet_runtime::{FormatError, Input, Model, OutputKind};

/// A 2 → 2 int8 softmax model whose output scale is `scale` (zero point `zp`).
fn with_output_scale(scale: f32, zp: i8) -> Vec<u8> {
    let mut l = int8_layer(2, &[127, -128, -128, 127], &[0, 0], -31);
    quant(&mut l).output_scale = scale;
    quant(&mut l).output_zero_point = zp;
    let mut m = int8_model(2, vec![l]);
    m.output = OutputKind::Softmax;
    m.raw_blob()
}

/// Found by `blob_mutate`: an int8 layer with output scale 3e38 passed validation ("finite and
/// positive"), and dequantising its int8 outputs, `(q - zp) * 3e38`, overflowed to ±inf, so the
/// softmax returned NaN probabilities from an accepted model. Validation now also requires
/// `scale * max |q - zp|` to be finite.
#[test]
fn output_scale_whose_steps_overflow_f32_is_rejected() {
    assert_eq!(
        Model::parse(&with_output_scale(3e38, -5)).map(|_| ()),
        Err(FormatError::BadScale { layer: Some(0) })
    );
    // Zero point 0: |q - zp| reaches 128 (q = -128). f32::MAX / 128 is the largest scale whose
    // steps stay finite: accepted, and the scores it gives are finite probabilities.
    let edge = f32::MAX / 128.0;
    let blob = with_output_scale(edge, 0);
    let m = Model::parse(&blob).expect("largest finite-step scale accepted");
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = [0f32; 2];
    for x in [[i16::MIN, i16::MAX], [i16::MAX, i16::MIN], [0, 0]] {
        m.infer(Input::I16(&x), &mut scratch, &mut scores).unwrap();
        assert!(
            scores
                .iter()
                .all(|s| s.is_finite() && (0.0..=1.0).contains(s)),
            "{scores:?}"
        );
        assert!((scores.iter().sum::<f32>() - 1.0).abs() < 1e-6);
    }
    // One ulp above: 128 steps overflow.
    let over = f32::from_bits(edge.to_bits() + 1);
    assert!((over * 128.0).is_infinite());
    assert_eq!(
        Model::parse(&with_output_scale(over, 0)).map(|_| ()),
        Err(FormatError::BadScale { layer: Some(0) })
    );
    // With zero point 127 the widest step is 255 (q = -128).
    assert_eq!(
        Model::parse(&with_output_scale(f32::MAX / 200.0, 127)).map(|_| ()),
        Err(FormatError::BadScale { layer: Some(0) })
    );
    assert!(Model::parse(&with_output_scale(f32::MAX / 256.0, 127)).is_ok());
}

/// Not a fault but a change made for `scripts/no-panic-check.sh`: labels are split on bytes
/// instead of with `str::split` (whose searcher kept a slice-index panic path on Cortex-M0).
/// The labels and their count must be exactly what `str::split('\n')` gives.
#[test]
fn labels_split_like_str_split() {
    let layer = int8_layer(2, &[1; 6], &[0; 3], 0);
    let blob = int8_model(2, vec![layer]).raw_blob();
    let parsed = Model::parse(&blob).unwrap();
    let base = parsed.desc().clone();
    let scratch = parsed.scratch_bytes() as u32;
    for labels in ["x\n\ny", "α\nβ\nγ", "a\nb\n", "\n\n", "one\ntwo\nthree"] {
        let mut d = base.clone();
        d.labels = labels;
        let blob = kinglet_builder::raw_blob(&d, scratch);
        let m = Model::parse(&blob).unwrap_or_else(|e| panic!("{labels:?}: {e}"));
        let want: Vec<&str> = labels.split('\n').collect();
        assert_eq!(m.labels().collect::<Vec<_>>(), want);
        assert_eq!(m.label(2), Some(want[2]));
        assert_eq!(m.label(3), None);
    }
    for labels in ["a\nb", "a\nb\nc\nd", "a"] {
        let mut d = base.clone();
        d.labels = labels;
        let found = labels.split('\n').count() as u32;
        assert_eq!(
            Model::parse(&kinglet_builder::raw_blob(&d, scratch)).map(|_| ()),
            Err(FormatError::LabelCount { expected: 3, found })
        );
    }
}
