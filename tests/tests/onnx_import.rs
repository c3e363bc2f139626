//! End-to-end checks of the ONNX importer on the fixtures written by
//! `tests/python/make_onnx_cases.py`: each valid model is imported and its float reference
//! forward pass compared with the outputs the onnx package's `ReferenceEvaluator` computed for
//! the same inputs (and, for the scikit-learn pipelines, with `Pipeline.predict_proba`);
//! each malformed model must give the expected error, naming the node and op.

use std::path::{Path, PathBuf};

use kinglet_converter::graph::{FloatModel, OutputKind};
use kinglet_converter::import::onnx::{import_onnx, import_onnx_file, OnnxImportError};
use kinglet_tests::{output_kind, scaler_kind, Reference};
use serde::Deserialize;

/// Largest accepted difference between our f64 forward pass of the imported f32 weights and a
/// reference output (probabilities or logits of order 1).
const TOL: f64 = 1e-5;

#[derive(Deserialize)]
struct Case {
    model: String,
    pattern: String,
    input_shape: Vec<Option<usize>>,
    inputs: Vec<Vec<f64>>,
    expected: Reference,
    output_kind: String,
    params: usize,
    #[serde(default)]
    scaler_kind: Option<String>,
    #[serde(default)]
    labels: Option<Vec<String>>,
    #[serde(default)]
    sklearn: Option<Reference>,
}

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join("onnx")
}

fn case(name: &str) -> Case {
    let path = dir().join(format!("{name}.json"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn import(c: &Case) -> FloatModel {
    import_onnx_file(&dir().join(&c.model))
        .unwrap_or_else(|e| panic!("{} ({}): {e}", c.model, c.pattern))
}

/// Parameter count of the dense layers: in·out + out per layer (common practice, no source).
fn params(m: &FloatModel) -> usize {
    m.layers
        .iter()
        .map(|l| l.inputs * l.outputs + l.outputs)
        .sum()
}

/// Compares the forward pass on every input row with a reference's rows. A binary sigmoid
/// model's single output `p` is compared as the two columns `[1 - p, p]` when the reference
/// has two (the two-class form exporters write).
fn compare(m: &FloatModel, c: &Case, r: &Reference) {
    assert_eq!(c.inputs.len(), r.rows.len(), "{}", c.model);
    assert!(!c.inputs.is_empty(), "{}: no input rows", c.model);
    for (k, (x, want)) in c.inputs.iter().zip(&r.rows).enumerate() {
        let x32: Vec<f32> = x.iter().map(|&v| v as f32).collect();
        let mut got = m.forward_reference(&x32);
        if m.output == OutputKind::Sigmoid && want.len() == 2 && got.len() == 1 {
            got = vec![1.0 - got[0], got[0]];
        }
        assert_eq!(
            got.len(),
            want.len(),
            "{} row {k}: output width ({})",
            c.model,
            r.source
        );
        for (j, (g, w)) in got.iter().zip(want).enumerate() {
            assert!(
                (g - w).abs() <= TOL,
                "{} row {k} output {j}: imported model gives {g}, {} gives {w}",
                c.model,
                r.source
            );
        }
    }
}

/// Imports one valid fixture and runs every check its JSON allows.
fn check_case(name: &str) -> FloatModel {
    let c = case(name);
    let m = import(&c);
    let width: usize = c
        .input_shape
        .iter()
        .skip(1)
        .map(|d| d.expect("fixture shapes are known"))
        .product();
    assert_eq!(m.input_len, width, "{name}: input width");
    assert_eq!(m.output, output_kind(&c.output_kind), "{name}: output kind");
    assert_eq!(params(&m), c.params, "{name}: parameter count");
    match (&c.scaler_kind, &m.scaler) {
        (None, None) => {}
        (Some(k), Some(s)) => {
            assert_eq!(s.kind, scaler_kind(k), "{name}: scaler kind");
            assert!(
                s.offset.len() == 1 || s.offset.len() == width,
                "{name}: scaler length"
            );
        }
        (want, got) => panic!("{name}: scaler expected {want:?}, imported {got:?}"),
    }
    assert_eq!(
        m.labels,
        c.labels.clone().unwrap_or_default(),
        "{name}: labels"
    );
    // Source: onnx.reference.ReferenceEvaluator outputs recorded in the fixture.
    assert!(
        c.expected
            .source
            .starts_with("onnx.reference.ReferenceEvaluator"),
        "{name}"
    );
    compare(&m, &c, &c.expected);
    if let Some(sk) = &c.sklearn {
        // Source: scikit-learn Pipeline.predict_proba on the same rows.
        assert!(sk.source.contains("predict_proba"), "{name}");
        compare(&m, &c, sk);
    }
    m
}

const VALID: &[&str] = &[
    "gemm_transb_alpha_beta",
    "matmul_add_row_bias",
    "batchnorm_fold",
    "noop_removal",
    "flatten_input",
    "reshape_input",
    "scaler_op",
    "scaler_op_single",
    "sub_div_scaler",
    "mul_add_scaler",
    "uniform_div_scaler",
    "sigmoid_binary",
    "label_branch_strings",
    "typed_fields",
    "constant_nodes",
    // Hand-built in tf2onnx's form (tf2onnx itself folds this Transpose first; the
    // framework-made exports are checked in tests/tests/exporters.rs).
    "tf_transposed_weight",
    "mlp_784_100_10_gemm",
    "mlp_784_100_10_matmul",
    "single_784_10",
    "sk_digits_standard_mlp",
    "sk_iris_minmax_mlp",
    "sk_breast_cancer_binary_mlp",
];

#[test]
fn every_valid_fixture_matches_its_references() {
    for name in VALID {
        check_case(name);
    }
    // Every JSON fixture on disk is covered by the list above.
    let on_disk: Vec<String> = std::fs::read_dir(dir())
        .expect("fixture dir")
        .filter_map(|e| e.ok()?.path().file_stem()?.to_str().map(String::from))
        .filter(|s| dir().join(format!("{s}.json")).exists())
        .collect();
    for s in &on_disk {
        assert!(
            VALID.contains(&s.as_str()),
            "fixture {s}.json is not checked"
        );
    }
}

#[test]
fn image_mlp_gemm_and_matmul_twins_are_the_same_model() {
    let gemm = check_case("mlp_784_100_10_gemm");
    let matmul = check_case("mlp_784_100_10_matmul");
    // 784·100 + 100 + 100·10 + 10 (common practice, no source).
    assert_eq!(params(&gemm), 79_510);
    assert_eq!(gemm.layers.len(), 2);
    assert_eq!((gemm.layers[0].inputs, gemm.layers[0].outputs), (784, 100));
    assert_eq!((gemm.layers[1].inputs, gemm.layers[1].outputs), (100, 10));
    assert_eq!(
        gemm.layers, matmul.layers,
        "transposed initializers give the same [out][in] weights"
    );
    assert!(gemm.scaler.is_none());
    let single = check_case("single_784_10");
    // 784·10 + 10 (common practice, no source).
    assert_eq!(params(&single), 7_850);
}

#[test]
fn sklearn_exports_keep_scaler_and_labels() {
    let digits = check_case("sk_digits_standard_mlp");
    assert_eq!(
        digits.labels,
        (0..10).map(|d| d.to_string()).collect::<Vec<_>>()
    );
    assert_eq!(digits.scaler.as_ref().map(|s| s.offset.len()), Some(64));
    let iris = check_case("sk_iris_minmax_mlp");
    assert_eq!(iris.labels, vec!["0", "1", "2"]);
    let binary = check_case("sk_breast_cancer_binary_mlp");
    assert_eq!(binary.output, OutputKind::Sigmoid);
    assert_eq!(binary.layers.last().map(|l| l.outputs), Some(1));
    assert_eq!(binary.classes(), 2);
}

#[test]
fn bn_is_folded_and_noops_are_removed() {
    let bn = check_case("batchnorm_fold");
    assert_eq!(
        bn.layers.len(),
        2,
        "BatchNormalization leaves no layer of its own"
    );
    let noop = check_case("noop_removal");
    assert_eq!(noop.layers.len(), 2);
}

type Check = fn(&OnnxImportError) -> bool;

#[test]
fn malformed_fixtures_give_clear_errors() {
    use OnnxImportError as E;
    let cases: &[(&str, Check, &[&str])] = &[
        (
            "bad_conv",
            |e| matches!(e, E::UnsupportedOp { .. }),
            &["'conv1' (op Conv, domain ai.onnx)", "supported:", "Gemm"],
        ),
        (
            "bad_thresholded_relu",
            |e| matches!(e, E::UnsupportedOp { .. }),
            &[
                "'thresholded1' (op ThresholdedRelu, domain ai.onnx)",
                "supported:",
            ],
        ),
        (
            "bad_shape_mismatch",
            |e| matches!(e, E::Node { .. }),
            &["'fc2' (op Gemm", "take 5 inputs", "4 outputs"],
        ),
        (
            "bad_two_inputs",
            |e| matches!(e, E::Inputs { .. }),
            &["'x'", "'x2'", "exactly one graph input"],
        ),
        (
            "bad_nan_weight",
            |e| matches!(e, E::Node { .. }),
            &["'fc_nan' (op Gemm", "'Wnan'", "non-finite", "index 7"],
        ),
        (
            "bad_cycle",
            |e| matches!(e, E::Cycle { .. }),
            &["cycle", "'add_loop' (op Add"],
        ),
        (
            "bad_disconnected",
            |e| matches!(e, E::Disconnected { .. }),
            &[
                "'stray_relu' (op Relu",
                "does not depend on graph input 'x'",
            ],
        ),
        (
            "bad_sigmoid_multi",
            |e| matches!(e, E::Node { .. }),
            &[
                "'sigmoid_multi' (op Sigmoid",
                "Sigmoid on 4 outputs",
                "single output",
            ],
        ),
        (
            "bad_trans_a",
            |e| matches!(e, E::Node { .. }),
            &[
                "'fc_transa' (op Gemm",
                "transA = 1",
                "supported: transA = 0",
            ],
        ),
        (
            "bad_zero_scale",
            |e| matches!(e, E::Node { .. }),
            &["'add_one' (op Add", "feature 1", "scale is 0"],
        ),
        (
            "bad_sk_zipmap",
            |e| matches!(e, E::Node { .. }),
            &["'ZipMap' (op ZipMap, domain ai.onnx.ml)", "'zipmap': False"],
        ),
        (
            "bad_empty_graph",
            |e| matches!(e, E::EmptyGraph),
            &["no nodes"],
        ),
        (
            "bad_truncated",
            |e| matches!(e, E::Decode(_)),
            &["truncated"],
        ),
        // Constants that are not folded, and shape computations that are not evaluated
        // (rows C115 to C119 of docs/bad-inputs.md): refused, naming node and op.
        (
            "bad_constant_not_folded",
            |e| matches!(e, E::Node { .. }),
            &["'noise_bias' (op RandomNormal", "not folded at import"],
        ),
        (
            "bad_fold_cast_fp16",
            |e| matches!(e, E::Node { .. }),
            &["'weight_fp16' (op Cast", "FLOAT16 is not folded"],
        ),
        (
            "bad_shape_arith",
            |e| matches!(e, E::Node { .. }),
            &["'double_batch' (op Mul", "computation on the data's shape"],
        ),
        (
            "bad_shape_batch_last",
            |e| matches!(e, E::Node { .. }),
            &["'flatten' (op Reshape", "batch size at position 1"],
        ),
        (
            "bad_shape_unknown_dim",
            |e| matches!(e, E::Node { .. }),
            &[
                "'shape' (op Shape",
                "dim 1 of the data's shape [?, ?, ?] is not known",
            ],
        ),
    ];
    for (name, is_kind, parts) in cases {
        let path = dir().join(format!("{name}.onnx"));
        assert!(path.exists(), "{name}.onnx is missing");
        let err = match import_onnx_file(&path) {
            Ok(_) => panic!("{name}: imported, expected an error"),
            Err(e) => e,
        };
        let msg = err.to_string();
        assert!(is_kind(&err), "{name}: unexpected error kind: {msg}");
        for p in *parts {
            assert!(msg.contains(p), "{name}: message lacks {p:?}: {msg}");
        }
    }
}

#[test]
fn missing_file_is_an_io_error_naming_the_path() {
    let err = import_onnx_file(Path::new("/nonexistent/model.onnx")).expect_err("no such file");
    assert!(matches!(err, OnnxImportError::Io { .. }));
    assert!(err.to_string().contains("/nonexistent/model.onnx"));
}

#[test]
fn damaged_bytes_never_panic() {
    let good = std::fs::read(dir().join("sk_iris_minmax_mlp.onnx")).expect("fixture");
    assert!(import_onnx(&good).is_ok());
    // Every prefix length in steps, and single-byte changes spread over the file: the importer
    // returns (an error or a model) without panicking.
    for cut in (0..good.len()).step_by(7) {
        let _ = import_onnx(&good[..cut]);
    }
    let mut errors = 0;
    for (k, pos) in (0..good.len()).step_by(5).enumerate() {
        let mut b = good.clone();
        b[pos] ^= [0xff, 0x80, 0x01, 0x7f][k % 4];
        if import_onnx(&b).is_err() {
            errors += 1;
        }
    }
    assert!(errors > 0, "some of the damaged files must be rejected");
}
