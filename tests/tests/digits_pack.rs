//! End to end on the bundled digits example: import the scikit-learn pipeline's ONNX export,
//! pack f32 and int8, and check against scikit-learn's own outputs.
//!
//! Reference: `examples/digits/expected_proba.csv` is scikit-learn 1.9.1
//! `Pipeline(StandardScaler, MLPClassifier).predict_proba` on the held-out rows of
//! `sklearn.datasets.load_digits` (UCI Optical Recognition of Handwritten Digits), written by
//! `examples/digits/make_model.py` and regenerated in CI by `tests/python/check_fixtures.py`.
use kinglet_converter::dataset::{load_csv, CsvOptions, LabelColumn};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8_sections, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::{Input, Model};
use kinglet_tests::{path, read_float_csv, run};

fn heldout() -> kinglet_converter::dataset::Dataset {
    load_csv(
        &path("examples/digits/heldout.csv"),
        &CsvOptions {
            label: Some(LabelColumn::Name("label".into())),
            has_header: None,
        },
    )
    .unwrap()
}

#[test]
fn float_pack_matches_scikit_learn_predict_proba() {
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let blob = pack_f32(&model).unwrap();
    let m = Model::parse(&blob).unwrap();
    let data = heldout();
    let expected = read_float_csv("examples/digits/expected_proba.csv");
    assert_eq!(expected.len(), data.rows);
    let mut worst = 0f64;
    for (r, want) in expected.iter().enumerate() {
        let (_, scores) = run(&m, data.row(r));
        for (s, e) in scores.iter().zip(want) {
            worst = worst.max((f64::from(*s) - e).abs());
        }
    }
    // Tolerance 1e-5 on every probability (the bar; f32 arithmetic vs float64).
    assert!(worst < 1e-5, "max |p - predict_proba| = {worst:e}");
}

#[test]
fn int8_pack_agrees_with_float_and_keeps_accuracy() {
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let calib = load_csv(
        &path("examples/digits/calibration.csv"),
        &CsvOptions::default(),
    )
    .unwrap();
    let f = pack_f32(&model).unwrap();
    let q = pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
        .unwrap()
        .blob;
    let (mf, mq) = (Model::parse(&f).unwrap(), Model::parse(&q).unwrap());
    let data = heldout();
    let labels: Vec<usize> = data
        .labels
        .as_ref()
        .unwrap()
        .iter()
        .map(|l| l.parse().unwrap())
        .collect();
    let (mut agree, mut right_f, mut right_q) = (0, 0, 0);
    for (r, &label) in labels.iter().enumerate() {
        let (cf, _) = run(&mf, data.row(r));
        let (cq, _) = run(&mq, data.row(r));
        agree += usize::from(cf == cq);
        right_f += usize::from(cf == label);
        right_q += usize::from(cq == label);
    }
    let n = data.rows as f64;
    let drop_pp = 100.0 * (right_f as f64 - right_q as f64) / n;
    eprintln!(
        "agreement {agree}/{}, float {right_f}, int8 {right_q}, drop {drop_pp:.2} pp",
        data.rows
    );
    assert!(
        agree as f64 >= 0.99 * n,
        "top-1 agreement {agree}/{}",
        data.rows
    );
    assert!(drop_pp <= 1.0, "accuracy drop {drop_pp} pp");
    // The float accuracy is scikit-learn's: reference_metrics.json holds its exact count.
    let metrics: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(path("examples/digits/reference_metrics.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(right_f as u64, metrics["correct"].as_u64().unwrap());
}

#[test]
fn integer_pixel_path_matches_the_float_input_path() {
    // Pixels 0..16 as u8 take the integer-only input path; the float path quantises the same
    // values with QuantizeLinear rounding. They may differ by one step on rounding ties only.
    let model = import_file(&path("examples/digits/model.onnx")).unwrap();
    let calib = load_csv(
        &path("examples/digits/calibration.csv"),
        &CsvOptions::default(),
    )
    .unwrap();
    let q = pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
        .unwrap()
        .blob;
    let m = Model::parse(&q).unwrap();
    let data = heldout();
    let mut same = 0;
    for r in 0..data.rows {
        let row = data.row(r);
        let pixels: Vec<u8> = row.iter().map(|&v| v as u8).collect();
        let mut scratch = vec![0u8; m.scratch_bytes()];
        let mut s = vec![0f32; 10];
        let mut first_f = Vec::new();
        m.infer_traced(Input::F32(row), &mut scratch, &mut s, &mut |st| {
            if st.index == 0 {
                first_f = (0..st.values.len())
                    .map(|i| st.values.int8(i).unwrap())
                    .collect();
            }
        })
        .unwrap();
        let mut first_i = Vec::new();
        let pi = m
            .infer_traced(Input::U8(&pixels), &mut scratch, &mut s, &mut |st| {
                if st.index == 0 {
                    first_i = (0..st.values.len())
                        .map(|i| st.values.int8(i).unwrap())
                        .collect();
                }
            })
            .unwrap();
        for (a, b) in first_f.iter().zip(&first_i) {
            assert!(
                (i16::from(*a) - i16::from(*b)).abs() <= 1,
                "row {r}: {a} vs {b}"
            );
        }
        let (cf, _) = run(&m, row);
        same += usize::from(cf == pi.class);
    }
    assert!(
        same as f64 >= 0.99 * data.rows as f64,
        "{same}/{}",
        data.rows
    );
}
