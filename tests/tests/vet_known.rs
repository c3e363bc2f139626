//! `kinglet vet` on hand-made models and rows whose answers are worked out by hand in the
//! comments: every row agreeing, exactly one disagreement, a class never predicted, rows without
//! labels, labels written as class names.
use kinglet_converter::dataset::Dataset;
use kinglet_converter::graph::{Activation, DenseLayer, FloatModel, OutputKind};
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::vet::{self, Criteria, ModelPair, Parallelism, Sources, VetReport};
use kinglet_runtime::Model;

/// `outputs` logits `W x + b` over two inputs, softmax, no scaler.
fn model(weights: Vec<f32>, bias: Vec<f32>, labels: &[&str]) -> FloatModel {
    let outputs = bias.len();
    FloatModel {
        input_len: 2,
        scaler: None,
        layers: vec![DenseLayer {
            inputs: 2,
            outputs,
            weights,
            bias,
            activation: Activation::Linear,
        }],
        output: OutputKind::Softmax,
        labels: labels.iter().map(|s| s.to_string()).collect(),
    }
}

fn rows(r: &[[f32; 2]], labels: Option<&[&str]>) -> Dataset {
    Dataset {
        rows: r.len(),
        width: 2,
        features: r.iter().flatten().copied().collect(),
        labels: labels.map(|l| l.iter().map(|s| s.to_string()).collect()),
        source: "hand-made".into(),
    }
}

fn run(
    m: &FloatModel,
    data: &Dataset,
    calibration: &[[f32; 2]],
    criteria: &Criteria,
) -> Result<VetReport, String> {
    let f = pack_f32(m).unwrap();
    let q = pack_int8(m, &rows(calibration, None), RangeMethod::MinMax)
        .unwrap()
        .blob;
    let pair = ModelPair::new(Model::parse(&f).unwrap(), Model::parse(&q).unwrap()).unwrap();
    vet::vet(
        &pair,
        data,
        &Sources::default(),
        criteria,
        Parallelism::Parallel,
        &|_| {},
    )
    .map_err(|e| format!("{e:#}"))
}

const CALIBRATION: [[f32; 2]; 2] = [[-4.0, -4.0], [4.0, 4.0]];

#[test]
fn all_rows_agree() {
    // Identity logits: the class is the larger input. Margins of at least 1 survive int8.
    // Predictions 0 1 0 1 0 against labels 0 1 0 0 0: both models right on 4 of 5, the same 4.
    let m = model(vec![1.0, 0.0, 0.0, 1.0], vec![0.0, 0.0], &[]);
    let d = rows(
        &[[3.0, 0.0], [0.0, 3.0], [2.0, -1.0], [-1.0, 2.0], [3.0, 1.0]],
        Some(&["0", "1", "0", "0", "0"]),
    );
    let r = run(
        &m,
        &d,
        &CALIBRATION,
        &Criteria {
            max_drop_pp: Some(0.0),
            ..Criteria::default()
        },
    )
    .unwrap();
    assert_eq!(r.predictions.float, vec![0, 1, 0, 1, 0]);
    assert_eq!(r.predictions.int8, r.predictions.float);
    assert_eq!((r.agreement.agree, r.agreement.rows), (5, 5));
    assert!(r.agreement.disagreements.is_empty());
    let a = r.accuracy.as_ref().unwrap();
    assert_eq!((a.float.correct, a.int8.correct), (4, 4));
    assert_eq!(
        (
            a.paired.both_right,
            a.paired.first_only,
            a.paired.second_only,
            a.paired.both_wrong
        ),
        (4, 0, 0, 1)
    );
    assert_eq!(a.drop_pp, 0.0);
    // No discordant rows: McNemar's p is 1 and the interval is symmetric about 0.
    assert_eq!(a.mcnemar.p_value, 1.0);
    assert!((a.drop_interval_pp.lower + a.drop_interval_pp.upper).abs() < 1e-9);
    assert!(a.drop_interval_pp.lower < 0.0);
    // A drop of 0 passes a limit of 0.
    assert!(r.passed());
}

#[test]
fn exactly_one_disagreement_is_found_and_named() {
    // Row 3 is [1.0, 1.0001]: float logits differ by 1e-4, so float says class 1; the int8 input
    // step is about 8/255 ≈ 0.031, so both inputs land on the same level, the int8 logits tie and
    // argmax takes the lower index, class 0. Labels 0 1 1 1: float right on all 4, int8 on 3.
    let m = model(vec![1.0, 0.0, 0.0, 1.0], vec![0.0, 0.0], &[]);
    let d = rows(
        &[[3.0, 0.0], [0.0, 3.0], [1.0, 1.0001], [-1.0, 2.0]],
        Some(&["0", "1", "1", "1"]),
    );
    let r = run(
        &m,
        &d,
        &CALIBRATION,
        &Criteria {
            max_drop_pp: Some(10.0),
            ..Criteria::default()
        },
    )
    .unwrap();
    assert_eq!(r.predictions.float, vec![0, 1, 1, 1]);
    assert_eq!(r.predictions.int8, vec![0, 1, 0, 1]);
    assert_eq!(r.agreement.agree, 3);
    let d0 = &r.agreement.disagreements;
    assert_eq!(d0.len(), 1);
    assert_eq!(
        (
            d0[0].data_row,
            d0[0].float_class,
            d0[0].int8_class,
            d0[0].label
        ),
        (3, 1, 0, Some(1))
    );
    let a = r.accuracy.as_ref().unwrap();
    assert_eq!(
        (
            a.paired.both_right,
            a.paired.first_only,
            a.paired.second_only,
            a.paired.both_wrong
        ),
        (3, 1, 0, 0)
    );
    // Drop = (b - c)/n = 1/4 = 25 pp; McNemar: b = 1, c = 0 → 2·P(X ≤ 0 | n = 1) = 2·1/2 = 1.
    assert!((a.drop_pp - 25.0).abs() < 1e-12);
    assert_eq!(a.mcnemar.p_value, 1.0);
    // 25 pp > 10 pp: the gate fails.
    let v = r.verdict.as_ref().unwrap();
    assert!(!v.passed && !r.passed());
    assert!(
        v.checks[0].text.contains("25.00 pp > 10.00 pp"),
        "{}",
        v.checks[0].text
    );
    // The per-row score difference ranks that row: the tie puts int8 at (0.5, 0.5), float at
    // softmax([1, 1.0001]) ≈ (0.499975, 0.500025), so |Δ| ≈ 2.5e-5 plus int8 rounding.
    assert!(d0[0].max_score_diff < 0.05);
}

#[test]
fn class_never_predicted_has_precision_zero_with_a_note() {
    // Logits [x0, x1, -10]: class 2 never wins for these rows. Predictions 0 1 0 1, labels
    // 0 1 2 2. Class 0: tp 1, predicted 2, rows 1 → precision 1/2, recall 1. Same for class 1.
    // Class 2: rows 2, never predicted → precision 0 (zero_division=0), recall 0.
    let m = model(
        vec![1.0, 0.0, 0.0, 1.0, 0.0, 0.0],
        vec![0.0, 0.0, -10.0],
        &["cat", "dog", "bird"],
    );
    let d = rows(
        &[[2.0, 0.0], [0.0, 2.0], [1.0, 0.0], [0.0, 1.0]],
        Some(&["cat", "dog", "bird", "2"]),
    );
    let r = run(&m, &d, &CALIBRATION, &Criteria::default()).unwrap();
    assert_eq!(r.predictions.labels, Some(vec![0, 1, 2, 2]));
    assert_eq!(r.predictions.float, vec![0, 1, 0, 1]);
    let per = r.per_class.as_ref().unwrap();
    assert_eq!((per[0].float.precision, per[0].float.recall), (0.5, 1.0));
    assert_eq!((per[1].float.precision, per[1].float.recall), (0.5, 1.0));
    assert_eq!(
        (per[2].float.precision, per[2].float.recall, per[2].support),
        (0.0, 0.0, 2)
    );
    assert!(per[2].float.precision_undefined() && per[2].int8.precision_undefined());
    assert_eq!(per[2].name, "bird");
    let notes: Vec<&String> = r
        .notes
        .iter()
        .filter(|n| n.contains("class 2 (bird)") && n.contains("never predicts"))
        .collect();
    assert_eq!(notes.len(), 2, "{:?}", r.notes);
    assert_eq!(
        r.confusion.as_ref().unwrap().float.counts,
        vec![vec![1, 0, 0], vec![0, 1, 0], vec![1, 1, 0]]
    );
    assert!(r.verdict.is_none());
}

#[test]
fn without_labels_agreement_and_score_error_remain() {
    let m = model(vec![1.0, 0.0, 0.0, 1.0], vec![0.0, 0.0], &[]);
    let d = rows(&[[3.0, 0.0], [1.0, 1.0001]], None);
    let r = run(
        &m,
        &d,
        &CALIBRATION,
        &Criteria {
            min_agreement_pct: Some(60.0),
            ..Criteria::default()
        },
    )
    .unwrap();
    assert!(r.accuracy.is_none() && r.per_class.is_none() && r.confusion.is_none());
    assert_eq!((r.agreement.agree, r.agreement.rows), (1, 2));
    assert!(r.score_error.max_abs > 0.0 && r.score_error.max_abs < 0.05);
    // 50 % agreement < 60 %: fails.
    assert!(!r.passed());
    // An accuracy gate cannot be judged without labels: an error, not a silent pass.
    let e = run(
        &m,
        &d,
        &CALIBRATION,
        &Criteria {
            max_drop_pp: Some(1.0),
            ..Criteria::default()
        },
    )
    .unwrap_err();
    assert!(e.contains("--max-drop needs labelled rows"), "{e}");
}

#[test]
fn unknown_label_names_the_row() {
    let m = model(vec![1.0, 0.0, 0.0, 1.0], vec![0.0, 0.0], &["cat", "dog"]);
    let d = rows(&[[3.0, 0.0], [1.0, 1.0]], Some(&["cat", "cow"]));
    let e = run(&m, &d, &CALIBRATION, &Criteria::default()).unwrap_err();
    let msg = e;
    assert!(
        msg.contains("hand-made") && msg.contains("data row 2") && msg.contains("\"cow\""),
        "{msg}"
    );
}
