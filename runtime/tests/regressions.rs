//! Regression tests for faults found by fuzzing (`fuzz/`, see `docs/bad-inputs.md`). Each test
//! names the target that found it.
mod common;

use common::{int8_layer, int8_model, quant};
use kinglet_builder::{Activation, OwnedLayer, Precision};
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

/// `common::int8_model` with one 2 → 2 layer whose activation is the pointwise record
/// (`kind`, zero point `zp`, `data`), as a blob of `version` (0: the version the table needs).
fn pointwise_int8(kind: u8, zp: i8, data: Vec<u8>, version: u16) -> Vec<u8> {
    let mut l = int8_layer(2, &[1, 0, 0, 1], &[0, 0], 0);
    l.activation = Activation::Pointwise {
        kind,
        input_zero_point: zp,
        data,
    };
    let mut blob = int8_model(2, vec![l]).raw_blob();
    if version != 0 {
        let at = kinglet_runtime::unstable::wire::header::offset::VERSION;
        blob[at..at + 2].copy_from_slice(&version.to_le_bytes());
        kinglet_builder::reseal(&mut blob).unwrap();
    }
    blob
}

/// A 256-entry table: `q ↦ f(q)` for `q` in −128..=127.
fn table(f: impl Fn(i32) -> i32) -> Vec<u8> {
    (-128..=127)
        .map(|q| f(q).clamp(-128, 127) as i8 as u8)
        .collect()
}

/// The int8 path of a pointwise layer: requantise to the record's zero point, then look up.
/// Layer: identity weights, multiplier 2^30 with shift 0 (M = 0.5), zero point 3; table
/// `q ↦ −q`. Input [10, −7] (scale 1): accumulators [10, −7] → 0.5 · [10, −7] = [5, −3.5],
/// rounded [5, −3] (ties up), + 3 = [8, 0] → table [−8, 0].
#[test]
fn int8_pointwise_table_is_applied_after_requantisation() {
    let blob = pointwise_int8(0, 3, table(|q| -q), 0);
    assert_eq!(
        u16::from_le_bytes([blob[4], blob[5]]),
        4,
        "a record is version 4"
    );
    let m = Model::parse(&blob).unwrap();
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = [0f32; 2];
    let mut stages = Vec::new();
    m.infer_traced(Input::I16(&[10, -7]), &mut scratch, &mut scores, &mut |s| {
        stages.push(
            (0..s.values.len())
                .filter_map(|i| s.values.int8(i))
                .collect::<Vec<_>>(),
        )
    })
    .unwrap();
    assert_eq!(stages[1], vec![-8, 0]);
    // Dequantised with the layer's output scale 0.05 and zero point 0.
    assert_eq!(scores, [-0.4, 0.0]);
}

/// R35: a pointwise kind byte the reader does not know.
#[test]
fn r35_unknown_activation_kind_is_rejected() {
    for kind in [11u8, 12, 200, 255] {
        assert_eq!(
            Model::parse(&pointwise_int8(kind, 0, table(|q| q), 0)).map(|_| ()),
            Err(FormatError::UnknownActivation { layer: 0, kind })
        );
    }
    assert_eq!(
        FormatError::UnknownActivation { layer: 0, kind: 11 }.to_string(),
        "layer 0: unknown activation kind 11"
    );
}

/// R36: an int8 pointwise layer without its 256-entry table (none, one entry short or over,
/// f32 parameters in its place).
#[test]
fn r36_int8_activation_without_its_table_is_rejected() {
    let bad = Err(FormatError::ActivationRecord { layer: 0 });
    for len in [0usize, 4, 255, 257, 512] {
        assert_eq!(
            Model::parse(&pointwise_int8(0, 0, vec![0; len], 0)).map(|_| ()),
            bad,
            "{len} bytes"
        );
    }
    assert!(FormatError::ActivationRecord { layer: 0 }
        .to_string()
        .starts_with("layer 0: activation record does not match the precision"));
}

/// An f32 2 → 2 model (identity weights) with the pointwise record (`kind`, `zp`, `data`).
fn pointwise_f32(kind: u8, zp: i8, data: Vec<u8>) -> Vec<u8> {
    let act = Activation::Pointwise {
        kind,
        input_zero_point: zp,
        data,
    };
    let l = OwnedLayer::f32(2, 2, act, &[1.0, 0.0, 0.0, 1.0], &[0.0, 0.0]);
    let mut m = int8_model(2, vec![l]);
    m.precision = Precision::F32;
    m.input_quant = None;
    m.raw_blob()
}

/// R37: an f32 pointwise layer with a table, the wrong number of parameters for its kind, or
/// a non-zero zero point.
#[test]
fn r37_f32_activation_with_a_table_or_wrong_parameters_is_rejected() {
    if !cfg!(feature = "f32") {
        return;
    }
    let bad = Err(FormatError::ActivationRecord { layer: 0 });
    let p = |v: &[f32]| kinglet_builder::le::f32s(v);
    // Tanh (0) takes no parameter; a table is an int8 record.
    assert_eq!(
        Model::parse(&pointwise_f32(0, 0, vec![0; 256])).map(|_| ()),
        bad
    );
    assert_eq!(
        Model::parse(&pointwise_f32(0, 0, p(&[1.0]))).map(|_| ()),
        bad
    );
    // LeakyRelu (2) takes one, Clip (3) two.
    assert_eq!(Model::parse(&pointwise_f32(2, 0, vec![])).map(|_| ()), bad);
    assert_eq!(
        Model::parse(&pointwise_f32(3, 0, p(&[0.0]))).map(|_| ()),
        bad
    );
    assert_eq!(
        Model::parse(&pointwise_f32(3, 0, vec![0; 7])).map(|_| ()),
        bad
    );
    assert_eq!(
        Model::parse(&pointwise_f32(0, 1, vec![])).map(|_| ()),
        bad,
        "zero point"
    );
    assert!(Model::parse(&pointwise_f32(3, 0, p(&[0.0, 6.0]))).is_ok());
}

/// R38: NaN or infinite pointwise parameters, and a `Clip` with `lo > hi`.
#[test]
fn r38_bad_activation_parameters_are_rejected() {
    if !cfg!(feature = "f32") {
        return;
    }
    let bad = Err(FormatError::ActivationParams { layer: 0 });
    let p = |v: &[f32]| kinglet_builder::le::f32s(v);
    for v in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
        assert_eq!(Model::parse(&pointwise_f32(2, 0, p(&[v]))).map(|_| ()), bad);
        assert_eq!(
            Model::parse(&pointwise_f32(7, 0, p(&[1.0, v]))).map(|_| ()),
            bad
        );
    }
    assert_eq!(
        Model::parse(&pointwise_f32(3, 0, p(&[1.0, 0.5]))).map(|_| ()),
        bad
    );
    assert!(Model::parse(&pointwise_f32(3, 0, p(&[0.5, 0.5]))).is_ok());
    assert_eq!(
        FormatError::ActivationParams { layer: 0 }.to_string(),
        "layer 0: activation parameter is NaN, infinite or out of order"
    );
    // A valid one runs: tanh of the identity layer's outputs.
    let blob = pointwise_f32(0, 0, vec![]);
    let m = Model::parse(&blob).unwrap();
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = [0f32; 2];
    m.infer(Input::F32(&[0.5, -2.0]), &mut scratch, &mut scores)
        .unwrap();
    // tanh 0.5 = 0.462117157, tanh −2 = −0.964027580 (numpy.tanh in float64)
    assert!((scores[0] - 0.462_117_16).abs() < 1e-6, "{scores:?}");
    assert!((scores[1] + 0.964_027_6).abs() < 1e-6, "{scores:?}");
}

/// R39: a pointwise record needs version 4, and version 4 holds nothing else.
#[test]
fn r39_pointwise_record_needs_format_version_4() {
    for old in [1u16, 2, 3] {
        assert_eq!(
            Model::parse(&pointwise_int8(0, 0, table(|q| q), old)).map(|_| ()),
            Err(FormatError::VersionMismatch {
                header: old,
                body: 4
            })
        );
    }
    let mut plain = int8_model(2, vec![int8_layer(2, &[1, 0, 0, 1], &[0, 0], 0)]).raw_blob();
    plain[4] = 4;
    kinglet_builder::reseal(&mut plain).unwrap();
    assert_eq!(
        Model::parse(&plain).map(|_| ()),
        Err(FormatError::VersionMismatch { header: 4, body: 1 })
    );
}

/// A 4 → 3 int8 model whose one layer has int4 weights `w` (row-major, each in [-8, 7]) in
/// `Nibble4x4` with `pad` alignment bytes, its weight field edited by `poke`, labelled version
/// `version`, written without validation.
fn int4_blob(
    w: &[i8],
    bias: &[i32],
    pad: usize,
    version: u16,
    poke: impl Fn(&mut Vec<u8>),
) -> Vec<u8> {
    use kinglet_runtime::unstable::wire::nibble;
    let mut l = int8_layer(4, w, bias, 0);
    let mut field = vec![0u8; pad + nibble::bytes(4, 3)];
    assert!(nibble::pack(4, 3, w, &mut field[pad..]));
    poke(&mut field);
    l.layout = kinglet_builder::WeightLayout::Nibble4x4;
    l.weights = field;
    let mut blob = int8_model(4, vec![l]).raw_blob();
    blob[4..6].copy_from_slice(&version.to_le_bytes());
    kinglet_builder::reseal(&mut blob).unwrap();
    blob
}

const W4: [i8; 12] = [1, -8, 7, 0, -1, 2, -3, 4, 5, -6, 7, -8];

/// An int4 blob computes what the same weights as int8 compute (`FORMAT.md` §3.5).
// The int4 layer is refused whole without the `int4` feature (R50).
#[cfg(feature = "int4")]
#[test]
fn int4_layer_computes_the_int8_layer_of_its_weights() {
    let bias = [3, -100, 7];
    let int8 = int8_model(4, vec![int8_layer(4, &W4, &bias, 0)]).raw_blob();
    for pad in 0..=3 {
        let blob = int4_blob(&W4, &bias, pad, 6, |_| {});
        let m4 = Model::parse(&blob).expect("valid int4 blob");
        let m8 = Model::parse(&int8).expect("valid int8 blob");
        for x in [
            [1.0, 2.0, 3.0, 4.0],
            [-100.0, 50.0, 127.0, -128.0],
            [0.0; 4],
        ] {
            let (mut s4, mut s8) = ([0u8; 8], [0u8; 8]);
            let (mut y4, mut y8) = ([0f32; 3], [0f32; 3]);
            m4.infer(Input::F32(&x), &mut s4, &mut y4).unwrap();
            m8.infer(Input::F32(&x), &mut s8, &mut y8).unwrap();
            assert_eq!(y4, y8, "pad {pad}, x {x:?}");
        }
    }
}

/// R45: an int4 layer needs version 6, and version 6 holds nothing else.
#[test]
fn r45_int4_weights_need_format_version_6() {
    for old in 1u16..=5 {
        assert_eq!(
            Model::parse(&int4_blob(&W4, &[0; 3], 0, old, |_| {})).map(|_| ()),
            Err(FormatError::VersionMismatch {
                header: old,
                body: 6
            })
        );
    }
    let mut plain = int8_model(4, vec![int8_layer(4, &W4, &[0; 3], 0)]).raw_blob();
    plain[4] = 6;
    kinglet_builder::reseal(&mut plain).unwrap();
    assert_eq!(
        Model::parse(&plain).map(|_| ()),
        Err(FormatError::VersionMismatch { header: 6, body: 1 })
    );
}

/// R46: an int4 weight field of the wrong length (a byte short, a byte long past the 3
/// alignment bytes, output-major length).
// The int4 layer is refused whole without the `int4` feature (R50).
#[cfg(feature = "int4")]
#[test]
fn r46_int4_field_of_the_wrong_length_is_rejected() {
    let len = Err(FormatError::TensorLength {
        layer: Some(0),
        tensor: kinglet_runtime::TensorKind::Weights,
    });
    let short = int4_blob(&W4, &[0; 3], 0, 6, |f| {
        f.pop();
    });
    assert_eq!(Model::parse(&short).map(|_| ()), len);
    let long = int4_blob(&W4, &[0; 3], 3, 6, |f| f.insert(0, 0));
    assert_eq!(Model::parse(&long).map(|_| ()), len);
    let om = int4_blob(&W4, &[0; 3], 0, 6, |f| f.truncate(6));
    assert_eq!(Model::parse(&om).map(|_| ()), len);
}

/// R47: a padding weight that is not zero (the nibble 8) or an alignment byte that is not 0.
// The int4 layer is refused whole without the `int4` feature (R50).
#[cfg(feature = "int4")]
#[test]
fn r47_int4_padding_must_be_zero() {
    let nz = Err(FormatError::NonZeroPadding { layer: Some(0) });
    // Row 3 (padding) is the high nibble of bytes 4-7; input 3 of every row is real here.
    let row = int4_blob(&W4, &[0; 3], 0, 6, |f| f[5] = (f[5] & 0x0F) | 0x90);
    assert_eq!(Model::parse(&row).map(|_| ()), nz, "padding row");
    let zero_nibble = int4_blob(&W4, &[0; 3], 0, 6, |f| f[5] &= 0x0F);
    assert_eq!(
        Model::parse(&zero_nibble).map(|_| ()),
        nz,
        "nibble 0 is -8, not zero"
    );
    let align = int4_blob(&W4, &[0; 3], 2, 6, |f| f[0] = 0x88);
    assert_eq!(Model::parse(&align).map(|_| ()), nz, "alignment byte");
    // A 3-input layer pads input 3: its nibbles must be 8 too.
    use kinglet_runtime::unstable::wire::nibble;
    let mut l = int8_layer(3, &[1, 2, 3], &[0], 0);
    let mut field = vec![0u8; nibble::bytes(3, 1)];
    assert!(nibble::pack(3, 1, &[1, 2, 3], &mut field));
    field[3] = 0x89;
    l.layout = kinglet_builder::WeightLayout::Nibble4x4;
    l.weights = field;
    let mut blob = int8_model(3, vec![l]).raw_blob();
    blob[4] = 6;
    kinglet_builder::reseal(&mut blob).unwrap();
    assert_eq!(Model::parse(&blob).map(|_| ()), nz, "padding input");
}

/// R48: int4 weights on an f32 model.
#[test]
fn r48_int4_layout_on_an_f32_model_is_rejected() {
    let mut m = kinglet_builder::sample::tiny_f32();
    m.layers[0].layout = kinglet_builder::WeightLayout::Nibble4x4;
    let (n, k) = (m.layers[0].inputs as usize, m.layers[0].outputs as usize);
    m.layers[0].weights = vec![0x88; kinglet_runtime::unstable::wire::nibble::bytes(n, k)];
    let mut blob = m.raw_blob();
    blob[4] = 6;
    kinglet_builder::reseal(&mut blob).unwrap();
    let want = if cfg!(feature = "f32") {
        FormatError::PrecisionMismatch { layer: Some(0) }
    } else {
        FormatError::F32NotBuiltIn
    };
    assert_eq!(Model::parse(&blob).map(|_| ()), Err(want));
}

/// R49: the accumulator bound of `FORMAT.md` §5 rule 14 holds for int4 rows (`Σ|w|` of the
/// decoded weights): one step past it is rejected, the bound itself accepted.
// The int4 layer is refused whole without the `int4` feature (R50).
#[cfg(feature = "int4")]
#[test]
fn r49_int4_accumulator_bound() {
    // Row 0: Σ|w| = 1 + 8 + 7 + 0 = 16, so the largest bias is 2^31 - 1 - 128 · 16.
    let edge = i32::MAX - 128 * 16;
    let ok = int4_blob(&W4, &[edge, 0, 0], 0, 6, |_| {});
    assert!(Model::parse(&ok).is_ok());
    let over = int4_blob(&W4, &[edge + 1, 0, 0], 0, 6, |_| {});
    assert_eq!(
        Model::parse(&over).map(|_| ()),
        Err(FormatError::AccumulatorOverflow {
            layer: 0,
            channel: 0
        })
    );
}

/// R53: int4 weights in the first layer of an int16-input model (its kernels multiply int16
/// by int8 only, `FORMAT.md` §3.6) are refused; in a later layer they are allowed.
#[cfg(all(feature = "int4", feature = "int16-input"))]
#[test]
fn r53_int4_weights_cannot_read_an_int16_input() {
    let mut m = kinglet_builder::sample::tiny_int16_input();
    let w: Vec<i8> = [1, 2, 3, -4, 5, -6, 7, -8, 7, 6, 5, 4].into();
    let field_len = kinglet_runtime::unstable::wire::nibble::bytes(3, 4);
    let mut field = vec![0u8; field_len];
    assert!(kinglet_runtime::unstable::wire::nibble::pack(
        3, 4, &w, &mut field
    ));
    let mut first = m.clone();
    first.layers[0].layout = kinglet_builder::WeightLayout::Nibble4x4;
    first.layers[0].weights = field;
    assert_eq!(
        Model::parse(&first.raw_blob()).map(|_| ()),
        Err(FormatError::PrecisionMismatch { layer: Some(0) })
    );
    // Layer 2 (4 → 2) in int4 is fine: it reads int8.
    let w2: Vec<i8> = [1, -2, 3, -4, -5, 6, -7, 7].into();
    let mut field = vec![0u8; kinglet_runtime::unstable::wire::nibble::bytes(4, 2)];
    assert!(kinglet_runtime::unstable::wire::nibble::pack(
        4, 2, &w2, &mut field
    ));
    m.layers[1].layout = kinglet_builder::WeightLayout::Nibble4x4;
    m.layers[1].weights = field;
    assert_eq!(Model::parse(&m.raw_blob()).map(|_| ()), Ok(()));
}

/// R55: an int16-input blob on a runtime built without the `int16-input` feature.
#[cfg(not(feature = "int16-input"))]
#[test]
fn r55_int16_input_needs_its_feature() {
    let blob = kinglet_builder::sample::tiny_int16_input().raw_blob();
    assert_eq!(
        Model::parse(&blob).map(|_| ()),
        Err(FormatError::Int16InputNotBuiltIn)
    );
}
