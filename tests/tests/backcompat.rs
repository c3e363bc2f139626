//! Blobs written by earlier versions of the packer stay readable (FORMAT.md: stability rule).
//! `tests/fixtures/blobs/v1-*.kgl` were packed at format version 1 (output-major weights) and
//! `v2-vibration-int8.kgl` at version 2 (Blocked4x4 weights), by
//! `kinglet pack examples/vibration/model.onnx --calibration examples/vibration/calibration.csv`
//! at the commit that added it; `v3-wine-ovr-int8.kgl` at version 3 (the one-vs-rest output) by
//! `kinglet pack tests/fixtures/linear/lr_ovr_wine_standard.onnx --calibration <its calibration
//! rows as CSV>`; `v4-tanh-iris-int8.kgl` at version 4 (a pointwise tanh record) by
//! `kinglet pack tests/fixtures/activation/mlp_tanh_iris.onnx --calibration <its calibration
//! rows as CSV> --integer-input --weight-scales`; `v5-vibration-int8.kgl` at version 5 (both
//! optional sections left out, `runtime/FORMAT.md` §3.4) by `kinglet pack
//! examples/vibration/model.onnx --calibration examples/vibration/calibration.csv`;
//! `v6-digits-int4.kgl` at version 6 (int4 weights on every layer, `runtime/FORMAT.md` §3.5) by
//! `kinglet pack examples/digits/model.onnx --calibration examples/digits/calibration.csv
//! --weights int4`; `v7-digits-int16-input.kgl` at version 7 (an int16 input tensor,
//! `runtime/FORMAT.md` §3.6) by `kinglet pack examples/digits/model.onnx --calibration
//! examples/digits/calibration.csv --input-tensor int16 --headroom 2`; none is ever regenerated. A reader change that rejects them, or
//! changes their predictions, fails here; `runtime/tests/fixture_bytes.rs` checks that every
//! single-byte change of each is rejected.
use kinglet_converter::dataset::{load_csv, CsvOptions, LabelColumn};
use kinglet_runtime::{Model, Precision};
use kinglet_tests::{path, run};

fn heldout(example: &str) -> kinglet_converter::dataset::Dataset {
    let opts = CsvOptions {
        label: Some(LabelColumn::Name("label".into())),
        has_header: None,
    };
    load_csv(&path(&format!("examples/{example}/heldout.csv")), &opts).unwrap()
}

#[test]
fn version_1_digits_int8_blob_still_reads_and_predicts() {
    let blob = std::fs::read(path("tests/fixtures/blobs/v1-digits-int8.kgl")).unwrap();
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        (m.precision(), m.input_len(), m.classes()),
        (Precision::Int8, 64, 10)
    );
    let data = heldout("digits");
    let right = (0..data.rows)
        .filter(|&r| run(&m, data.row(r)).0.to_string() == data.labels.as_ref().unwrap()[r])
        .count();
    // 434 of 450 when the fixture was made (the float model's count too).
    assert!(right >= 430, "{right}/450");
}

#[test]
fn version_1_vibration_f32_blob_still_reads_and_predicts() {
    let blob = std::fs::read(path("tests/fixtures/blobs/v1-vibration-f32.kgl")).unwrap();
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        m.labels().collect::<Vec<_>>(),
        ["normal", "imbalance", "bearing_wear", "loose_mount"]
    );
    let right = vibration_right(&m);
    assert!(right >= 585, "{right}/600");
}

/// Held-out vibration rows `m` labels right (of 600).
fn vibration_right(m: &Model<'_>) -> usize {
    let data = heldout("vibration");
    let labels = data.labels.as_ref().unwrap();
    (0..data.rows)
        .filter(|&r| m.label(run(m, data.row(r)).0) == Some(labels[r].as_str()))
        .count()
}

#[test]
fn version_2_vibration_int8_blob_still_reads_and_predicts() {
    let blob = std::fs::read(path("tests/fixtures/blobs/v2-vibration-int8.kgl")).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 2);
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        (m.precision(), m.input_len(), m.classes()),
        (Precision::Int8, 15, 4)
    );
    assert!(m.layers().all(
        |l| l.desc.layout == kinglet_runtime::unstable::wire::format::WeightLayout::Blocked4x4
    ));
    let right = vibration_right(&m);
    // 590 of 600 when the fixture was made.
    assert!(right >= 585, "{right}/600");
}

#[test]
fn version_3_one_vs_rest_blob_still_reads_and_predicts() {
    let blob = std::fs::read(path("tests/fixtures/blobs/v3-wine-ovr-int8.kgl")).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 3);
    let m = Model::parse(&blob).unwrap();
    assert_eq!(m.desc().output, kinglet_runtime::OutputKind::OneVsRest);
    assert_eq!(
        (m.precision(), m.input_len(), m.classes()),
        (Precision::Int8, 13, 3)
    );
    // The held-out rows of load_wine (UCI Wine) recorded with the fixture's model.
    let right = heldout_right(&m, "tests/fixtures/linear/lr_ovr_wine_standard.json", |s| {
        let sum: f32 = s.iter().sum();
        assert!((sum - 1.0).abs() < 1e-5, "one-vs-rest scores sum to {sum}");
    });
    // 45 of 45 when the fixture was made.
    assert!(right >= 44, "{right}/45");
}

#[test]
fn version_4_tanh_blob_still_reads_and_predicts() {
    use kinglet_runtime::unstable::pointwise::activation_name;
    let blob = std::fs::read(path("tests/fixtures/blobs/v4-tanh-iris-int8.kgl")).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 4);
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        (m.precision(), m.input_len(), m.classes()),
        (Precision::Int8, 4, 3)
    );
    let acts: Vec<_> = m.layers().map(|l| activation_name(l.desc)).collect();
    assert_eq!(acts, ["tanh", "linear"]);
    // The held-out rows of load_iris (Fisher 1936) recorded with the fixture's model.
    let right = heldout_right(&m, "tests/fixtures/activation/mlp_tanh_iris.json", |_| {});
    // 38 of 38 when the fixture was made.
    assert!(right >= 37, "{right}/38");
}

#[test]
fn version_5_blob_without_optional_sections_reads_and_predicts_as_the_full_one() {
    let blob = std::fs::read(path("tests/fixtures/blobs/v5-vibration-int8.kgl")).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 5);
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        (m.precision(), m.input_len(), m.classes()),
        (Precision::Int8, 15, 4)
    );
    assert!(!m.takes_integer_input() && !m.has_weight_scales());
    let right = vibration_right(&m);
    // 590 of 600 when the fixture was made (the version-2 fixture's count too).
    assert!(right >= 585, "{right}/600");
    // The same table with both sections put back is the version-2 blob a pack wrote before
    // version 5, and it scores every held-out row bit for bit as the version-5 blob.
    let mut full = kinglet_builder::OwnedModel::from_desc(m.desc());
    let q = full.input_quant.as_mut().unwrap();
    let packed = kinglet_converter::pack::pack_int8_sections(
        &kinglet_converter::import::import_file(&path("examples/vibration/model.onnx")).unwrap(),
        &load_csv(
            &path("examples/vibration/calibration.csv"),
            &CsvOptions::default(),
        )
        .unwrap(),
        kinglet_converter::quantise::calibrate::RangeMethod::MinMax,
        kinglet_converter::pack::Sections::ALL,
    )
    .unwrap()
    .blob;
    let v2 = Model::parse(&packed).unwrap();
    assert_eq!(u16::from_le_bytes([packed[4], packed[5]]), 2);
    let fq = v2.desc().input_quant.unwrap();
    (q.int_mult, q.int_add, q.int_shift) = (
        fq.int_mult.to_vec(),
        fq.int_add.to_vec(),
        fq.int_shift.to_vec(),
    );
    for (l, f) in full.layers.iter_mut().zip(v2.desc().layers.iter()) {
        l.quant.as_mut().unwrap().weight_scale = f.quant.unwrap().weight_scale.to_vec();
    }
    // Re-encoded with its weights realigned (the alignment bytes move with the sections).
    let rebuilt = full
        .encode_in(kinglet_runtime::unstable::wire::format::WeightLayout::Blocked4x4)
        .unwrap();
    assert!(
        rebuilt == packed,
        "the fixture is the full pack less its two sections"
    );
    let data = heldout("vibration");
    for r in 0..data.rows {
        let (a, sa) = run(&m, data.row(r));
        let (b, sb) = run(&v2, data.row(r));
        let bits = |s: &[f32]| s.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
        assert_eq!((a, bits(&sa)), (b, bits(&sb)), "row {r}");
    }
}

/// How many of a fixture case's held-out rows (`heldout`, `heldout_labels` in the JSON at
/// `rel`) `m` classifies right; `check` sees every row's scores.
fn heldout_right(m: &Model<'_>, rel: &str, check: impl Fn(&[f32])) -> usize {
    let case: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path(rel)).unwrap()).unwrap();
    let rows = case["heldout"].as_array().unwrap();
    let labels = case["heldout_labels"].as_array().unwrap();
    rows.iter()
        .zip(labels)
        .filter(|(r, l)| {
            let x: Vec<f32> = r
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap() as f32)
                .collect();
            let (class, scores) = run(m, &x);
            check(&scores);
            class as u64 == l.as_u64().unwrap()
        })
        .count()
}

#[test]
fn version_6_digits_int4_blob_still_reads_and_predicts() {
    use kinglet_runtime::unstable::wire::format::WeightLayout;
    let blob = std::fs::read(path("tests/fixtures/blobs/v6-digits-int4.kgl")).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 6);
    let m = Model::parse(&blob).unwrap();
    assert!(m.layers().all(|l| l.desc.layout == WeightLayout::Nibble4x4));
    let data = heldout("digits");
    let right = (0..data.rows)
        .filter(|&r| run(&m, data.row(r)).0.to_string() == data.labels.as_ref().unwrap()[r])
        .count();
    // 433 of 450 when the fixture was made (the float model's count: 434).
    assert!(right >= 430, "{right}/450");
}

#[test]
fn version_7_digits_int16_input_blob_still_reads_and_predicts() {
    use kinglet_runtime::unstable::wire::format::InputWidth;
    use kinglet_runtime::{Activations, Input, Stage};
    let blob = std::fs::read(path("tests/fixtures/blobs/v7-digits-int16-input.kgl")).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 7);
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        (m.precision(), m.input_len(), m.classes()),
        (Precision::Int8, 64, 10)
    );
    assert_eq!(m.desc().input_width(), InputWidth::I16);
    assert!(!m.takes_integer_input());
    let data = heldout("digits");
    let labels = data.labels.as_ref().unwrap();
    let (mut right, mut widest) = (0, 0i32);
    assert_eq!(labels.len(), data.rows);
    for (r, label) in labels.iter().enumerate() {
        let mut scratch = vec![0u8; m.scratch_bytes()];
        let mut scores = vec![0f32; m.output_len()];
        let p = m
            .infer_traced(
                Input::F32(data.row(r)),
                &mut scratch,
                &mut scores,
                &mut |s: &Stage<'_>| {
                    if s.index == 0 {
                        assert!(matches!(s.values, Activations::Int16 { .. }), "row {r}");
                        for i in 0..s.values.len() {
                            widest = widest.max(i32::from(s.values.int16(i).unwrap()).abs());
                        }
                    }
                },
            )
            .unwrap();
        // The traced pass is the plain one.
        assert_eq!(run(&m, data.row(r)).0, p.class, "row {r}");
        right += usize::from(p.class.to_string() == *label);
    }
    // The input tensor uses more than int8's range (330 when the fixture was made: a scaled
    // pixel of about 5.9 at a step of 1.793e-2).
    assert!(widest > 127, "largest |input| {widest}");
    // 434 of 450 when the fixture was made (the float model's count too).
    assert!(right >= 430, "{right}/450");
}
