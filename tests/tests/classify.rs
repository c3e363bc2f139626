//! `Model::classify` (the class without scores) against `Model::infer` on the two bundled
//! examples' held-out rows, int8 and f32 packs, through the float and the integer input paths,
//! and against scikit-learn's own labels for the digits pipeline.
//!
//! References: `examples/digits/expected_proba.csv` is scikit-learn's `predict_proba` on the
//! held-out rows of `sklearn.datasets.load_digits` (see `digits_pack.rs`); its argmax is
//! scikit-learn's predicted class. The vibration data is our own invented demo data.
use kinglet_converter::dataset::{load_csv, CsvOptions, Dataset, LabelColumn};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8_sections, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::{Input, Model, RunError};
use kinglet_tests::{path, read_float_csv, run};

fn load(example: &str, file: &str, labelled: bool) -> Dataset {
    let opts = CsvOptions {
        label: labelled.then(|| LabelColumn::Name("label".into())),
        has_header: None,
    };
    load_csv(&path(&format!("examples/{example}/{file}")), &opts).unwrap()
}

/// The f32 and int8 packs of an example.
fn packs(example: &str) -> (Vec<u8>, Vec<u8>) {
    let model = import_file(&path(&format!("examples/{example}/model.onnx"))).unwrap();
    let calib = load(example, "calibration.csv", false);
    let f = pack_f32(&model).unwrap();
    let q = pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
        .unwrap()
        .blob;
    (f, q)
}

fn classify(m: &Model<'_>, input: Input<'_>) -> usize {
    let mut scratch = vec![0u8; m.scratch_bytes()];
    m.classify(input, &mut scratch)
        .unwrap_or_else(|e| panic!("classify failed: {e}"))
}

/// Index of the largest value (ties to the lowest), as numpy's `argmax`.
fn argmax(v: &[f64]) -> usize {
    v.iter()
        .enumerate()
        .fold(
            (0, f64::NEG_INFINITY),
            |b, (i, &x)| if x > b.1 { (i, x) } else { b },
        )
        .0
}

#[test]
fn digits_classify_gives_infers_class_on_every_path() {
    let (f, q) = packs("digits");
    let (mf, mq) = (Model::parse(&f).unwrap(), Model::parse(&q).unwrap());
    let data = load("digits", "heldout.csv", true);
    let sklearn = read_float_csv("examples/digits/expected_proba.csv");
    assert_eq!(sklearn.len(), data.rows);
    let mut same_as_sklearn = 0;
    for (r, proba) in sklearn.iter().enumerate() {
        let row = data.row(r);
        // The digits features are pixel counts 0..=16, so the integer path sees the same values.
        let counts: Vec<i16> = row.iter().map(|&x| x as i16).collect();
        assert!(row.iter().zip(&counts).all(|(&x, &c)| x == f32::from(c)));
        let (cf, _) = run(&mf, row);
        let (cq, _) = run(&mq, row);
        assert_eq!(classify(&mf, Input::F32(row)), cf, "f32, row {r}");
        assert_eq!(
            classify(&mq, Input::F32(row)),
            cq,
            "int8 f32 input, row {r}"
        );
        let mut scratch = vec![0u8; mq.scratch_bytes()];
        let mut scores = vec![0f32; mq.output_len()];
        let integer = mq
            .infer(Input::I16(&counts), &mut scratch, &mut scores)
            .unwrap()
            .class;
        assert_eq!(
            classify(&mq, Input::I16(&counts)),
            integer,
            "int8 i16 input, row {r}"
        );
        same_as_sklearn += usize::from(classify(&mf, Input::F32(row)) == argmax(proba));
    }
    // The f32 pack reproduces predict_proba to 1e-5 (digits_pack.rs), so its classes are
    // scikit-learn's on every row.
    assert_eq!(same_as_sklearn, data.rows);
}

#[test]
fn vibration_classify_gives_infers_class() {
    let (f, q) = packs("vibration");
    let (mf, mq) = (Model::parse(&f).unwrap(), Model::parse(&q).unwrap());
    let data = load("vibration", "heldout.csv", true);
    for r in 0..data.rows {
        let row = data.row(r);
        assert_eq!(
            classify(&mf, Input::F32(row)),
            run(&mf, row).0,
            "f32, row {r}"
        );
        assert_eq!(
            classify(&mq, Input::F32(row)),
            run(&mq, row).0,
            "int8, row {r}"
        );
    }
}

#[test]
fn classify_refuses_what_infer_refuses() {
    let (_, q) = packs("vibration");
    let m = Model::parse(&q).unwrap();
    let mut scratch = vec![0u8; m.scratch_bytes()];
    assert_eq!(
        m.classify(Input::F32(&[0.0; 3]), &mut scratch),
        Err(RunError::InputLength {
            expected: 15,
            got: 3
        })
    );
    let n = m.scratch_bytes();
    assert_eq!(
        m.classify(Input::F32(&[0.0; 15]), &mut scratch[..n - 1]),
        Err(RunError::ScratchTooSmall {
            needed: n as u32,
            got: n as u32 - 1
        })
    );
    let mut bad = [0.0f32; 15];
    bad[7] = f32::NAN;
    assert_eq!(
        m.classify(Input::F32(&bad), &mut scratch),
        Err(RunError::NonFiniteInput { index: 7 })
    );
}
