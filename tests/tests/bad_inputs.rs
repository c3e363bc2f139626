//! The bad-input catalogue (`docs/bad-inputs.md`), runtime and library rows. Each test is one
//! row (its id in the name): a bad blob or a bad inference call gets one typed error whose
//! message names what is wrong and where. The command-line rows are in
//! `converter/tests/cli_bad_inputs.rs`.
//!
//! The blobs start from a real pack of `examples/vibration` (15 → 24 → 12 → 4, int8 and f32)
//! and are edited field by field, then written without validation (`kinglet_builder::raw_blob`)
//! behind a correct header (length and CRC), so each reaches exactly the rule it is about.
use kinglet_builder::{
    le, planned_scratch, raw_blob, raw_blob_with_layers, OwnedLayer, OwnedModel,
};
use kinglet_converter::dataset::{load_csv, CsvOptions};
use kinglet_converter::graph::Activation;
use kinglet_converter::graph::{DenseLayer, FloatModel};
use kinglet_converter::import::onnx::import_onnx_file;
use kinglet_converter::pack::{pack_f32, pack_int8, pack_int8_sections, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::unstable::wire::format::{
    ModelDesc, OutputKind, Precision, WeightLayout, MAX_LAYERS,
};
use kinglet_runtime::unstable::wire::header::offset::{self, VERSION};
use kinglet_runtime::unstable::wire::header::CHECKED_FROM;
use kinglet_runtime::{FormatError, Input, Model, RunError, TensorKind, HEADER_LEN};
use kinglet_tests::path;
use std::sync::OnceLock;

fn vibration() -> FloatModel {
    import_onnx_file(&path("examples/vibration/model.onnx")).expect("vibration model imports")
}

fn vibration_calibration() -> kinglet_converter::dataset::Dataset {
    load_csv(
        &path("examples/vibration/calibration.csv"),
        &CsvOptions::default(),
    )
    .expect("calibration rows load")
}

/// The int8 pack of the vibration example (calibrated on its calibration rows) with every
/// optional section (`--integer-input --weight-scales`): a version-2 blob whose every field the
/// rows below can edit.
fn int8_blob() -> &'static [u8] {
    static B: OnceLock<Vec<u8>> = OnceLock::new();
    B.get_or_init(|| {
        pack_int8_sections(
            &vibration(),
            &vibration_calibration(),
            RangeMethod::MinMax,
            Sections::ALL,
        )
        .expect("vibration packs to int8")
        .blob
    })
}

/// The default int8 pack of the vibration example: both optional sections left out (version 5).
fn lean_blob() -> &'static [u8] {
    static B: OnceLock<Vec<u8>> = OnceLock::new();
    B.get_or_init(|| {
        pack_int8(&vibration(), &vibration_calibration(), RangeMethod::MinMax)
            .expect("vibration packs to int8")
            .blob
    })
}

/// The f32 pack of the vibration example.
fn f32_blob() -> &'static [u8] {
    static B: OnceLock<Vec<u8>> = OnceLock::new();
    B.get_or_init(|| pack_f32(&vibration()).expect("vibration packs to f32"))
}

/// Makes the header's length and CRC right for the bytes as they are.
fn reseal(blob: &mut [u8]) {
    kinglet_builder::reseal(blob).expect("a blob at least a header long");
}

/// `d` written as a blob without validation, with the scratch field the planner computes.
fn raw(d: &ModelDesc<'_>) -> Vec<u8> {
    raw_blob(d, planned_scratch(d))
}

/// The decoded table of a packed blob, to edit.
fn table(blob: &[u8]) -> ModelDesc<'_> {
    Model::parse(blob)
        .expect("packed blob parses")
        .desc()
        .clone()
}

/// Parses `blob`, expecting `want`, and returns the message.
fn rejects(blob: &[u8], want: FormatError) -> String {
    match Model::parse(blob) {
        Ok(_) => panic!("accepted; expected {want:?}"),
        Err(e) => {
            assert_eq!(e, want);
            e.to_string()
        }
    }
}

#[test]
fn packed_baselines_are_valid() {
    // The rows below are meaningful only because the unedited blobs pass.
    for b in [int8_blob(), f32_blob()] {
        let m = Model::parse(b).unwrap();
        assert_eq!((m.input_len(), m.output_len()), (15, 4));
        assert_eq!(
            raw(m.desc()),
            b,
            "the raw writer reproduces the encoder's bytes"
        );
    }
}

#[test]
fn r01_truncated_blob() {
    let b = int8_blob();
    for n in [0, 3, 19, 20, b.len() / 2, b.len() - 1] {
        let e = Model::parse(&b[..n]).map(|_| ()).unwrap_err();
        let needed = if n < HEADER_LEN { 20 } else { b.len() as u32 };
        assert_eq!(
            e,
            FormatError::TooShort {
                needed,
                got: n as u32
            },
            "prefix of {n} bytes"
        );
    }
    let msg = Model::parse(&b[..100]).map(|_| ()).unwrap_err().to_string();
    assert_eq!(
        msg,
        format!("blob truncated: needs {} bytes, got 100", b.len())
    );
}

#[test]
fn r02_bit_flipped_blob() {
    let b = int8_blob();
    // Every bit of the checksummed region (scratch field and body) is caught by the CRC.
    for i in CHECKED_FROM..b.len() {
        for bit in 0..8 {
            let mut bad = b.to_vec();
            bad[i] ^= 1 << bit;
            let e = Model::parse(&bad).map(|_| ()).unwrap_err();
            assert!(
                matches!(e, FormatError::ChecksumMismatch { .. }),
                "flip at byte {i} bit {bit}: {e:?}"
            );
        }
    }
    let mut bad = b.to_vec();
    bad[100] ^= 4;
    let msg = Model::parse(&bad).map(|_| ()).unwrap_err().to_string();
    assert!(
        msg.starts_with("checksum mismatch: header says 0x"),
        "{msg}"
    );
}

#[test]
fn r03_newer_format_version() {
    let newer = kinglet_runtime::FORMAT_VERSION + 1;
    let mut b = int8_blob().to_vec();
    b[VERSION..VERSION + 2].copy_from_slice(&newer.to_le_bytes());
    let msg = rejects(&b, FormatError::UnsupportedVersion { found: newer });
    assert_eq!(
        msg,
        format!(
            "model format version {newer} is not supported (this reader accepts versions {} to {})",
            kinglet_runtime::unstable::wire::version::OLDEST_VERSION,
            kinglet_runtime::FORMAT_VERSION
        )
    );
    // Version 0 never existed.
    b[VERSION..VERSION + 2].copy_from_slice(&0u16.to_le_bytes());
    rejects(&b, FormatError::UnsupportedVersion { found: 0 });
}

#[test]
fn r04_wrong_magic() {
    // An ONNX file (a protobuf) handed to the reader.
    let onnx = std::fs::read(path("examples/vibration/model.onnx")).unwrap();
    assert_eq!(
        rejects(&onnx, FormatError::BadMagic),
        "not a Kinglet model: wrong magic bytes"
    );
    let mut b = int8_blob().to_vec();
    b[0] = b'k';
    rejects(&b, FormatError::BadMagic);
    // Short, but already visibly not ours.
    rejects(b"PK\x03\x04", FormatError::BadMagic);
}

#[test]
fn r05_reserved_flags_set() {
    let mut b = int8_blob().to_vec();
    b[offset::FLAGS] = 0x01;
    assert_eq!(
        rejects(&b, FormatError::ReservedFlags),
        "reserved header flags are set"
    );
}

#[test]
fn r06_extra_bytes_after_the_blob() {
    let mut b = int8_blob().to_vec();
    let n = b.len() as u32;
    b.extend_from_slice(&[0xFF; 8]);
    let msg = rejects(
        &b,
        FormatError::LengthMismatch {
            header: n,
            got: n + 8,
        },
    );
    assert!(msg.contains(&format!("total length {n}")), "{msg}");
}

#[test]
fn r07_body_is_not_a_layer_table() {
    let mut b = int8_blob()[..HEADER_LEN].to_vec();
    b.extend_from_slice(&[0xFF; 40]);
    reseal(&mut b);
    assert_eq!(rejects(&b, FormatError::Malformed), "malformed layer table");
}

#[test]
fn r08_bytes_after_the_layer_table() {
    let mut b = int8_blob().to_vec();
    b.push(0);
    reseal(&mut b);
    assert_eq!(
        rejects(&b, FormatError::TrailingBytes),
        "unexpected bytes after the layer table"
    );
}

#[test]
fn r09_empty_model() {
    let mut d = table(int8_blob());
    d.layers.clear();
    assert_eq!(
        rejects(&raw(&d), FormatError::NoLayers),
        "the model has no layers"
    );
}

#[test]
fn r10_zero_width() {
    let mut d = table(f32_blob());
    d.input_len = 0;
    assert_eq!(
        rejects(&raw(&d), FormatError::ZeroSized { layer: None }),
        "input stage: zero-sized tensor"
    );
    let mut d = table(f32_blob());
    d.layers[1].outputs = 0;
    assert_eq!(
        rejects(&raw(&d), FormatError::ZeroSized { layer: Some(1) }),
        "layer 1: zero-sized tensor"
    );
}

#[test]
fn r11_too_wide() {
    let mut d = table(f32_blob());
    d.layers[0].outputs = kinglet_runtime::unstable::wire::format::MAX_WIDTH + 1;
    assert_eq!(
        rejects(&raw(&d), FormatError::TooWide { layer: Some(0) }),
        "layer 0: wider than 16384 elements"
    );
}

#[test]
fn r12_mismatched_layer_widths() {
    let mut d = table(int8_blob());
    d.layers[2].inputs = 11;
    assert_eq!(
        rejects(&raw(&d), FormatError::ShapeMismatch { layer: 2 }),
        "layer 2: input width does not match the previous output width"
    );
    // The model input does not match layer 0.
    let mut d = table(int8_blob());
    d.input_len = 14;
    rejects(
        &raw(&d),
        FormatError::TensorLength {
            layer: None,
            tensor: TensorKind::ScalerOffset,
        },
    );
    d.scaler = None;
    rejects(
        &raw(&d),
        FormatError::TensorLength {
            layer: None,
            tensor: TensorKind::IntegerInput,
        },
    );
}

#[test]
fn r13_tensor_length_disagrees_with_shape() {
    let d0 = table(int8_blob());
    let short_w = &d0.layers[1].weights[..d0.layers[1].weights.len() - 1];
    let mut d = d0.clone();
    d.layers[1].weights = short_w;
    assert_eq!(
        rejects(
            &raw(&d),
            FormatError::TensorLength {
                layer: Some(1),
                tensor: TensorKind::Weights
            }
        ),
        "layer 1: weights length disagrees with the shape"
    );
    let long_bias = [d0.layers[0].bias, &[0, 0, 0, 0]].concat();
    let mut d = d0.clone();
    d.layers[0].bias = &long_bias;
    rejects(
        &raw(&d),
        FormatError::TensorLength {
            layer: Some(0),
            tensor: TensorKind::Bias,
        },
    );
    let mut d = d0.clone();
    let q = d.layers[2].quant.as_mut().unwrap();
    q.shift = &q.shift[1..];
    assert_eq!(
        rejects(
            &raw(&d),
            FormatError::TensorLength {
                layer: Some(2),
                tensor: TensorKind::Shift
            }
        ),
        "layer 2: shifts length disagrees with the shape"
    );
}

#[test]
fn r14_quantisation_does_not_match_precision() {
    let mut d = table(int8_blob());
    d.layers[1].quant = None;
    assert_eq!(
        rejects(&raw(&d), FormatError::PrecisionMismatch { layer: Some(1) }),
        "layer 1: quantisation parameters do not match the model precision"
    );
    let mut d = table(int8_blob());
    d.precision = Precision::F32;
    rejects(&raw(&d), FormatError::PrecisionMismatch { layer: None });
}

#[test]
fn r15_shift_out_of_range() {
    let d0 = table(int8_blob());
    let mut shifts = d0.layers[0].quant.unwrap().shift.to_vec();
    shifts[5] = 32;
    let mut d = d0.clone();
    d.layers[0].quant.as_mut().unwrap().shift = &shifts;
    assert_eq!(
        rejects(
            &raw(&d),
            FormatError::ShiftOutOfRange {
                layer: Some(0),
                channel: 5
            }
        ),
        "layer 0: shift out of range at channel 5"
    );
    // The integer input path: shifts above 62.
    let mut in_shift = d0.input_quant.unwrap().int_shift.to_vec();
    in_shift[3] = 63;
    let mut d = d0.clone();
    d.input_quant.as_mut().unwrap().int_shift = &in_shift;
    assert_eq!(
        rejects(
            &raw(&d),
            FormatError::ShiftOutOfRange {
                layer: None,
                channel: 3
            }
        ),
        "input stage: shift out of range at channel 3"
    );
}

#[test]
fn r16_multiplier_out_of_range() {
    let d0 = table(int8_blob());
    let mut m: Vec<i32> = d0.layers[1]
        .quant
        .unwrap()
        .multiplier
        .chunks_exact(4)
        .map(|c| i32::from_le_bytes(c.try_into().unwrap()))
        .collect();
    m[7] = (1 << 30) - 1;
    let bytes = le::i32s(&m);
    let mut d = d0.clone();
    d.layers[1].quant.as_mut().unwrap().multiplier = &bytes;
    assert_eq!(
        rejects(
            &raw(&d),
            FormatError::MultiplierOutOfRange {
                layer: 1,
                channel: 7
            }
        ),
        "layer 1: fixed-point multiplier out of range at channel 7"
    );
}

#[test]
fn r17_bad_quantisation_scale() {
    for (s, what) in [
        (0.0, "zero"),
        (-0.1, "negative"),
        (f32::NAN, "NaN"),
        (f32::INFINITY, "infinite"),
        (3e38, "so large that dequantised values overflow"),
    ] {
        let mut d = table(int8_blob());
        d.layers[2].quant.as_mut().unwrap().output_scale = s;
        let msg = rejects(&raw(&d), FormatError::BadScale { layer: Some(2) });
        assert!(
            msg.starts_with("layer 2: quantisation scale must be"),
            "{what}: {msg}"
        );
        let mut d = table(int8_blob());
        d.input_quant.as_mut().unwrap().scale = s;
        rejects(&raw(&d), FormatError::BadScale { layer: None });
    }
}

#[test]
fn r18_nan_or_inf_in_weights() {
    let d0 = table(f32_blob());
    for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
        let mut w = d0.layers[1].weights.to_vec();
        w[8..12].copy_from_slice(&bad.to_le_bytes());
        let mut d = d0.clone();
        d.layers[1].weights = &w;
        assert_eq!(
            rejects(
                &raw(&d),
                FormatError::NonFinite {
                    layer: Some(1),
                    tensor: TensorKind::Weights
                }
            ),
            "layer 1: NaN or infinity in weights"
        );
        let mut b = d0.layers[2].bias.to_vec();
        b[..4].copy_from_slice(&bad.to_le_bytes());
        let mut d = d0.clone();
        d.layers[2].bias = &b;
        rejects(
            &raw(&d),
            FormatError::NonFinite {
                layer: Some(2),
                tensor: TensorKind::Bias,
            },
        );
    }
    // int8 weight scales (reported, and used to dequantise in reports).
    let d0 = table(int8_blob());
    let ws = le::f32s(&[f32::NAN; 24]);
    let mut d = d0.clone();
    d.layers[0].quant.as_mut().unwrap().weight_scale = &ws;
    rejects(
        &raw(&d),
        FormatError::NonFinite {
            layer: Some(0),
            tensor: TensorKind::WeightScale,
        },
    );
}

#[test]
fn r19_nan_or_inf_in_scaler() {
    let d0 = table(int8_blob());
    let s = d0.scaler.unwrap();
    let mut off = s.offset.to_vec();
    off[4..8].copy_from_slice(&f32::NAN.to_le_bytes());
    let mut d = d0.clone();
    d.scaler.as_mut().unwrap().offset = &off;
    assert_eq!(
        rejects(
            &raw(&d),
            FormatError::NonFinite {
                layer: None,
                tensor: TensorKind::ScalerOffset
            }
        ),
        "input stage: NaN or infinity in scaler offsets"
    );
    let mut sc = s.scale.to_vec();
    sc[..4].copy_from_slice(&f32::INFINITY.to_le_bytes());
    let mut d = d0.clone();
    d.scaler.as_mut().unwrap().scale = &sc;
    rejects(
        &raw(&d),
        FormatError::NonFinite {
            layer: None,
            tensor: TensorKind::ScalerScale,
        },
    );
}

#[test]
fn r20_sigmoid_on_several_outputs() {
    let mut d = table(int8_blob());
    d.output = OutputKind::Sigmoid;
    d.labels = "";
    assert_eq!(
        rejects(&raw(&d), FormatError::SigmoidWidth),
        "a sigmoid output needs exactly one output unit"
    );
}

#[test]
fn r21_label_count_differs_from_classes() {
    let mut d = table(int8_blob());
    d.labels = "normal\nimbalance\nbearing_wear";
    assert_eq!(
        rejects(
            &raw(&d),
            FormatError::LabelCount {
                expected: 4,
                found: 3
            }
        ),
        "3 class labels for 4 classes"
    );
}

#[test]
fn r22_accumulator_could_overflow() {
    // Layer 1 (24 → 12) with output-major weights of our own: row 3 is 24 weights of -100.
    let w: Vec<u8> = (0..12 * 24)
        .map(|i| if i / 24 == 3 { -100i8 as u8 } else { 1 })
        .collect();
    let mut d0 = table(int8_blob());
    d0.layers[1].layout = WeightLayout::OutputMajor;
    d0.layers[1].weights = &w;
    let limit = i64::from(i32::MAX) - 128 * 24 * 100;
    let mut bias = vec![0i32; 12];
    for (b, ok) in [(limit, true), (limit + 1, false), (-limit - 1, false)] {
        bias[3] = b as i32;
        let bytes = le::i32s(&bias);
        let mut d = d0.clone();
        d.layers[1].bias = &bytes;
        let r = Model::parse(&raw(&d)).map(|_| ());
        if ok {
            assert_eq!(r, Ok(()), "bias at the bound is accepted");
        } else {
            assert_eq!(
                r.unwrap_err().to_string(),
                "layer 1: int32 accumulator could overflow at channel 3"
            );
        }
    }
}

#[test]
fn r23_scratch_field_disagrees() {
    let d = table(int8_blob());
    let plan = Model::parse(int8_blob()).unwrap().scratch_bytes() as u32;
    let msg = rejects(
        &raw_blob(&d, plan - 1),
        FormatError::ScratchMismatch {
            header: plan - 1,
            computed: plan,
        },
    );
    assert_eq!(
        msg,
        format!(
            "header scratch size {} disagrees with the computed {plan}",
            plan - 1
        )
    );
}

#[test]
fn r24_more_layers_than_the_format_holds() {
    let d = table(f32_blob());
    let square = OwnedLayer {
        inputs: 4,
        outputs: 4,
        weights: vec![0; 64],
        bias: vec![0; 16],
        ..OwnedLayer::from_desc(&d.layers[2])
    };
    let mut layers: Vec<_> = d.layers.iter().copied().collect();
    layers.extend(std::iter::repeat_n(
        square.as_desc(),
        MAX_LAYERS + 1 - layers.len(),
    ));
    rejects(
        &raw_blob_with_layers(&d, &layers, 0),
        FormatError::Malformed,
    );
    // The converter says so in words before it gets that far.
    let l = |i, o| DenseLayer {
        inputs: i,
        outputs: o,
        weights: vec![0.5; i * o],
        bias: vec![0.0; o],
        activation: Activation::Relu,
    };
    let nine = FloatModel {
        input_len: 2,
        scaler: None,
        layers: (0..9).map(|_| l(2, 2)).collect(),
        output: OutputKind::Softmax,
        labels: vec![],
    };
    let e = pack_f32(&nine).unwrap_err().to_string();
    assert_eq!(
        e,
        "the model has 9 dense layers; the format holds at most 8"
    );
}

#[test]
fn r34_header_version_not_the_tables() {
    // The CRC does not cover the version field; the reader holds it to the table's version.
    // The vibration pack with output-major weights is a version-1 blob: relabelled version 2.
    let table = OwnedModel::from_desc(Model::parse(int8_blob()).unwrap().desc());
    let mut b = table.encode_in(WeightLayout::OutputMajor).unwrap();
    assert_eq!(b[VERSION], 1);
    b[VERSION] = 2;
    assert_eq!(
        rejects(&b, FormatError::VersionMismatch { header: 2, body: 1 }),
        "the header says format version 2, but the layer table is version 1 (a blob carries exactly the version its table needs)"
    );
    // The Blocked4x4 pack is version 2: relabelled version 1.
    let mut b = int8_blob().to_vec();
    assert_eq!(b[VERSION], 2);
    b[VERSION] = 1;
    rejects(&b, FormatError::VersionMismatch { header: 1, body: 2 });
}

fn run(
    blob: &[u8],
    input: Input<'_>,
    scratch: Option<usize>,
    scores: Option<usize>,
) -> Result<kinglet_runtime::Prediction, RunError> {
    let m = Model::parse(blob).unwrap();
    let mut a = vec![0u8; scratch.unwrap_or(m.scratch_bytes())];
    let mut s = vec![0f32; scores.unwrap_or(m.output_len())];
    m.infer(input, &mut a, &mut s)
}

#[test]
fn r25_input_of_the_wrong_width() {
    let e = run(int8_blob(), Input::F32(&[0.0; 14]), None, None).unwrap_err();
    assert_eq!(
        e,
        RunError::InputLength {
            expected: 15,
            got: 14
        }
    );
    assert_eq!(e.to_string(), "input has 14 features, the model takes 15");
    assert!(run(int8_blob(), Input::U8(&[0; 16]), None, None).is_err());
}

#[test]
fn r26_scratch_too_small() {
    let need = Model::parse(int8_blob()).unwrap().scratch_bytes();
    let e = run(int8_blob(), Input::F32(&[0.0; 15]), Some(need - 1), None).unwrap_err();
    assert_eq!(
        e,
        RunError::ScratchTooSmall {
            needed: need as u32,
            got: need as u32 - 1
        }
    );
    assert_eq!(
        e.to_string(),
        format!(
            "scratch buffer too small: needs {need} bytes, got {}",
            need - 1
        )
    );
    assert!(run(f32_blob(), Input::F32(&[0.0; 15]), Some(0), None).is_err());
}

#[test]
fn r27_score_buffer_too_small() {
    let e = run(int8_blob(), Input::F32(&[0.0; 15]), None, Some(3)).unwrap_err();
    assert_eq!(e, RunError::ScoresTooSmall { needed: 4, got: 3 });
    assert_eq!(e.to_string(), "score buffer too small: needs 4, got 3");
}

#[test]
fn r28_nan_or_inf_in_float_input() {
    for blob in [int8_blob(), f32_blob()] {
        for (i, bad) in [
            (0usize, f32::NAN),
            (7, f32::INFINITY),
            (14, f32::NEG_INFINITY),
        ] {
            let mut x = [0.5f32; 15];
            x[i] = bad;
            let e = run(blob, Input::F32(&x), None, None).unwrap_err();
            assert_eq!(e, RunError::NonFiniteInput { index: i as u32 });
            assert_eq!(
                e.to_string(),
                format!("input feature {i} is NaN or infinite")
            );
        }
    }
}

#[test]
fn r29_extreme_integer_inputs_saturate() {
    // On the int8 model's integer path every i16 quantises into [-128, 127]: i16::MIN and
    // i16::MAX give the same input tensor as any value far enough out, and scores stay
    // probabilities.
    let m = Model::parse(int8_blob()).unwrap();
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = [0f32; 4];
    let input_tensor = |x: &[i16], scratch: &mut [u8], scores: &mut [f32]| {
        let mut first = Vec::new();
        m.infer_traced(Input::I16(x), scratch, scores, &mut |s| {
            if s.index == 0 {
                first = (0..s.values.len()).map(|i| s.values.int8(i)).collect();
            }
        })
        .unwrap();
        first
    };
    let lo = input_tensor(&[i16::MIN; 15], &mut scratch, &mut scores);
    assert_eq!(lo, input_tensor(&[-30_000; 15], &mut scratch, &mut scores));
    assert!((scores.iter().sum::<f32>() - 1.0).abs() < 1e-5);
    let hi = input_tensor(&[i16::MAX; 15], &mut scratch, &mut scores);
    assert_eq!(hi, input_tensor(&[30_000; 15], &mut scratch, &mut scores));
    assert!(scores.iter().all(|s| (0.0..=1.0).contains(s)));
    // Far-out floats saturate the same way on the float input path.
    let f_lo = {
        let mut t = Vec::new();
        m.infer_traced(
            Input::F32(&[-1e30; 15]),
            &mut scratch,
            &mut scores,
            &mut |s| {
                if s.index == 0 {
                    t = (0..s.values.len()).map(|i| s.values.int8(i)).collect();
                }
            },
        )
        .unwrap();
        t
    };
    assert!(
        f_lo.iter().all(|q| matches!(q, Some(-128) | Some(127))),
        "{f_lo:?}"
    );
}

#[test]
fn r30_f32_model_overflows_on_far_out_input() {
    // 1 → 2 → 2 with weights 1e30: an input of 1e10 makes the hidden units 1e40 = inf in f32.
    let l = |i: usize, o: usize| DenseLayer {
        inputs: i,
        outputs: o,
        weights: vec![1e30; i * o],
        bias: vec![0.0; o],
        activation: Activation::Relu,
    };
    let m = FloatModel {
        input_len: 1,
        scaler: None,
        layers: vec![l(1, 2), l(2, 2)],
        output: OutputKind::Softmax,
        labels: vec![],
    };
    let blob = pack_f32(&m).unwrap();
    assert!(run(&blob, Input::F32(&[1e-30]), None, None).is_ok());
    let e = run(&blob, Input::F32(&[1e10]), None, None).unwrap_err();
    assert_eq!(e, RunError::NonFiniteOutput);
    assert_eq!(
        e.to_string(),
        "the model produced a non-finite output (input far out of range)"
    );
}

#[test]
fn r31_bias_too_large_for_its_weights() {
    // Found by review while writing this catalogue: a bias of 1 next to weights of 1e-30 is
    // 6e33 accumulator steps. The quantiser's float-to-int cast saturated and the zero-point
    // fold overflowed i64 (a panic in debug builds; release wrapped and reported a meaningless
    // overflow bound). Then it was refused; but such rows are what training leaves of a dead
    // unit (a scikit-learn MLP on 784 pixels has one), so now the row's weight scale is widened
    // until the bias fits (`quantise::params::scale_floor`): its weights round to 0 and the
    // output is the bias, as in the float model.
    let m = FloatModel {
        input_len: 2,
        scaler: None,
        layers: vec![DenseLayer {
            inputs: 2,
            outputs: 2,
            weights: vec![1e-30, 1e-30, 1.0, 1.0],
            bias: vec![1.0, 0.0],
            activation: Activation::Linear,
        }],
        output: OutputKind::Softmax,
        labels: vec![],
    };
    let cal = kinglet_converter::dataset::Dataset {
        rows: 3,
        width: 2,
        features: vec![1.0, 2.0, 3.0, 4.0, -1.0, 0.0],
        labels: None,
        source: "rows".into(),
    };
    let p = pack_int8(&m, &cal, RangeMethod::MinMax).unwrap();
    let model = Model::parse(&p.blob).unwrap();
    let float_blob = pack_f32(&m).unwrap();
    let float = Model::parse(&float_blob).unwrap();
    for x in [[1.0f32, 2.0], [3.0, 4.0], [-1.0, 0.0]] {
        let (mut s1, mut q) = (vec![0u8; model.scratch_bytes()], [0f32; 2]);
        let (mut s2, mut f) = (vec![0u8; float.scratch_bytes()], [0f32; 2]);
        model.infer(Input::F32(&x), &mut s1, &mut q).unwrap();
        float.infer(Input::F32(&x), &mut s2, &mut f).unwrap();
        // softmax(1, x0 + x1) from the int8 blob within 0.02 of the float one.
        for (a, b) in q.iter().zip(f) {
            assert!((a - b).abs() < 0.02, "{x:?}: {a} vs {b}");
        }
    }
}

#[test]
fn r32_npy_header_longer_than_the_file() {
    // Found by fuzzing `dataset_load`: the `.npy` reader allocated the header length the
    // preamble declares (here 3.6 GB, format 3.0) before reading it. Format 1.0 too.
    let dir = tempfile::tempdir().unwrap();
    for (version, len) in [
        (3u8, 0xD884_FF8Au32.to_le_bytes().to_vec()),
        (1, vec![0xFF, 0xFF]),
    ] {
        let mut b = vec![0x93];
        b.extend_from_slice(b"NUMPY");
        b.extend_from_slice(&[version, 0]);
        b.extend_from_slice(&len);
        b.extend_from_slice(b"{'descr': '<f4', 'fortran_order': False, 'shape': (1, 1), }\n");
        let p = dir.path().join(format!("v{version}.npy"));
        std::fs::write(&p, &b).unwrap();
        let e = kinglet_converter::dataset::load_npy(&p, None).unwrap_err();
        let msg = kinglet_converter::error_line::one_line(&e);
        assert!(msg.contains("the header is declared as"), "{msg}");
        assert!(msg.contains(&format!("v{version}.npy")), "{msg}");
    }
}

#[test]
fn r40_integer_input_on_a_blob_without_the_integer_path() {
    let m = Model::parse(lean_blob()).unwrap();
    assert_eq!(u16::from_le_bytes([lean_blob()[4], lean_blob()[5]]), 5);
    assert!(!m.takes_integer_input());
    let counts = [0i16; 15];
    let bytes = [0u8; 15];
    for input in [Input::I16(&counts), Input::U8(&bytes)] {
        let e = run(lean_blob(), input, None, None).unwrap_err();
        assert_eq!(e, RunError::NoIntegerInput);
        assert_eq!(
            e.to_string(),
            "this int8 blob has no integer input path: feed f32 features, or pack it with `kinglet pack --integer-input`"
        );
        let mut scratch = vec![0u8; m.scratch_bytes()];
        assert_eq!(
            m.classify(input, &mut scratch),
            Err(RunError::NoIntegerInput)
        );
    }
    // Float features still run, and the full pack takes integers.
    assert!(run(lean_blob(), Input::F32(&[0.0; 15]), None, None).is_ok());
    assert!(Model::parse(int8_blob()).unwrap().takes_integer_input());
}

#[test]
fn r41_section_left_out_under_an_older_version() {
    // An empty section is version 5: relabelled 2 (the Blocked4x4 version it had before), it
    // is refused rather than read as a damaged version-2 blob; and a full blob relabelled 5.
    let mut b = lean_blob().to_vec();
    b[VERSION] = 2;
    assert_eq!(
        rejects(&b, FormatError::VersionMismatch { header: 2, body: 5 }),
        "the header says format version 2, but the layer table is version 5 (a blob carries exactly the version its table needs)"
    );
    let mut b = int8_blob().to_vec();
    b[VERSION] = 5;
    rejects(&b, FormatError::VersionMismatch { header: 5, body: 2 });
}

#[test]
fn r42_partial_integer_input_path() {
    // Some of the three tables empty, the others kept: a partial section.
    let d0 = table(int8_blob());
    let q0 = *d0.input_quant.as_ref().unwrap();
    let cuts: [fn(&mut kinglet_runtime::unstable::wire::format::InputQuantDesc<'_>); 3] = [
        |q| q.int_mult = &[],
        |q| q.int_add = &[],
        |q| {
            q.int_mult = &[];
            q.int_add = &[];
        },
    ];
    for cut in cuts {
        let mut d = d0.clone();
        let mut q = q0;
        cut(&mut q);
        d.input_quant = Some(q);
        assert_eq!(
            rejects(
                &raw(&d),
                FormatError::TensorLength {
                    layer: None,
                    tensor: TensorKind::IntegerInput
                }
            ),
            "input stage: integer input tables length disagrees with the shape"
        );
    }
    // Only the shifts left out (the multipliers and addends kept).
    let mut d = d0.clone();
    let mut q = q0;
    q.int_shift = &[];
    d.input_quant = Some(q);
    rejects(
        &raw(&d),
        FormatError::TensorLength {
            layer: None,
            tensor: TensorKind::IntegerInput,
        },
    );
}

#[test]
fn r43_weight_scales_on_some_layers_only() {
    // Left out on layer 1 (0-based) but kept on layers 0 and 2; then kept on layer 1 only.
    let d0 = table(int8_blob());
    let mut d = d0.clone();
    d.layers[1].quant.as_mut().unwrap().weight_scale = &[];
    let want = FormatError::TensorLength {
        layer: Some(1),
        tensor: TensorKind::WeightScale,
    };
    assert_eq!(
        rejects(&raw(&d), want),
        "layer 1: weight scales length disagrees with the shape"
    );
    let lean = table(lean_blob());
    let mut d = lean.clone();
    d.layers[1].quant.as_mut().unwrap().weight_scale =
        d0.layers[1].quant.as_ref().unwrap().weight_scale;
    rejects(&raw(&d), want);
    // A section cut short is partial too: 3 of layer 0's 24 weight scales.
    let mut d = d0.clone();
    d.layers[0].quant.as_mut().unwrap().weight_scale =
        &d0.layers[0].quant.as_ref().unwrap().weight_scale[..12];
    rejects(
        &raw(&d),
        FormatError::TensorLength {
            layer: Some(0),
            tensor: TensorKind::WeightScale,
        },
    );
}

#[test]
fn r44_required_tensor_empty_in_a_version_5_blob() {
    // Only the two optional sections may be empty: weights, biases, multipliers and shifts
    // are required whatever the version, and so is a declared scaler's data.
    let lean = table(lean_blob());
    type Cut = fn(&mut ModelDesc<'_>);
    let cases: [(Cut, FormatError); 5] = [
        (
            |d| d.layers[0].weights = &[],
            FormatError::TensorLength {
                layer: Some(0),
                tensor: TensorKind::Weights,
            },
        ),
        (
            |d| d.layers[1].bias = &[],
            FormatError::TensorLength {
                layer: Some(1),
                tensor: TensorKind::Bias,
            },
        ),
        (
            |d| d.layers[2].quant.as_mut().unwrap().multiplier = &[],
            FormatError::TensorLength {
                layer: Some(2),
                tensor: TensorKind::Multiplier,
            },
        ),
        (
            |d| d.layers[0].quant.as_mut().unwrap().shift = &[],
            FormatError::TensorLength {
                layer: Some(0),
                tensor: TensorKind::Shift,
            },
        ),
        (
            |d| {
                let s = d.scaler.as_mut().unwrap();
                s.offset = &[];
                s.scale = &[];
            },
            FormatError::TensorLength {
                layer: None,
                tensor: TensorKind::ScalerOffset,
            },
        ),
    ];
    for (cut, want) in cases {
        let mut d = lean.clone();
        cut(&mut d);
        rejects(&raw(&d), want);
    }
}
