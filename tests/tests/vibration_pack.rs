//! End to end on the vibration demo (invented data, `examples/vibration/`): the scikit-learn
//! pipeline's ONNX export with string class labels, packed f32 and int8.
//!
//! Reference: `examples/vibration/expected_proba.csv` is scikit-learn's `predict_proba` on the
//! held-out rows, written by `examples/vibration/train.py` (regenerated in CI).
use kinglet_converter::dataset::{load_csv, resolve_labels, CsvOptions, LabelColumn};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::Model;
use kinglet_tests::{path, read_float_csv, run};

#[test]
fn vibration_float_and_int8_packs() {
    let model = import_file(&path("examples/vibration/model.onnx")).unwrap();
    assert_eq!(
        model.labels,
        ["normal", "imbalance", "bearing_wear", "loose_mount"]
    );
    let opts = CsvOptions {
        label: Some(LabelColumn::Name("label".into())),
        has_header: None,
    };
    let data = load_csv(&path("examples/vibration/heldout.csv"), &opts).unwrap();
    let truth = resolve_labels(data.labels.as_ref().unwrap(), &model.labels, 4).unwrap();
    let calib = load_csv(
        &path("examples/vibration/calibration.csv"),
        &CsvOptions::default(),
    )
    .unwrap();
    let f = pack_f32(&model).unwrap();
    let q = pack_int8(&model, &calib, RangeMethod::MinMax).unwrap().blob;
    let (mf, mq) = (Model::parse(&f).unwrap(), Model::parse(&q).unwrap());
    let expected = read_float_csv("examples/vibration/expected_proba.csv");
    let (mut worst, mut agree, mut right_f, mut right_q) = (0f64, 0, 0, 0);
    for (r, (want, &t)) in expected.iter().zip(&truth).enumerate() {
        let (cf, sf) = run(&mf, data.row(r));
        let (cq, _) = run(&mq, data.row(r));
        for (s, e) in sf.iter().zip(want) {
            worst = worst.max((f64::from(*s) - e).abs());
        }
        agree += usize::from(cf == cq);
        right_f += usize::from(cf == t);
        right_q += usize::from(cq == t);
    }
    eprintln!("vibration: max |p - predict_proba| {worst:e}, agreement {agree}/600, float {right_f}, int8 {right_q}");
    assert!(worst < 1e-5, "{worst:e}");
    assert_eq!(right_f, 592, "train.py reports 592/600 for the float model");
    assert!(agree >= 594, "agreement {agree}/600 (≥ 99%)");
    assert!(
        right_f - right_q.min(right_f) <= 6,
        "int8 loses more than 1 pp"
    );
}
