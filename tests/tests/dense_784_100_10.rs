//! The 784 → 100 → 10 classifier shape, hand-built with `onnx.helper`
//! (`tests/python/make_onnx_cases.py`: Flatten → Gemm(transB=1) → Relu → Gemm(transB=1) →
//! Softmax, and its MatMul + Add twin with the same weights), plus a single 784 → 10 softmax
//! layer: imported, packed to f32 and run by the runtime, against the onnx package's
//! `onnx.reference.ReferenceEvaluator` outputs stored beside each model; then packed to int8.
use kinglet_converter::dataset::Dataset;
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::Model;
use kinglet_tests::{path, run};

#[derive(serde::Deserialize)]
struct Expected {
    source: String,
    rows: Vec<Vec<f64>>,
}

#[derive(serde::Deserialize)]
struct Case {
    model: String,
    inputs: Vec<Vec<f32>>,
    expected: Expected,
    params: usize,
}

fn case(name: &str) -> Case {
    let text = std::fs::read_to_string(path(&format!("tests/fixtures/onnx/{name}.json"))).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn check_f32_pack(name: &str, params: usize) {
    let c = case(name);
    assert!(c.expected.source.contains("ReferenceEvaluator"));
    let model = import_file(&path(&format!("tests/fixtures/onnx/{}", c.model))).unwrap();
    // Parameter count: in·out + out per dense layer (common practice, no source).
    let counted: usize = model
        .layers
        .iter()
        .map(|l| l.inputs * l.outputs + l.outputs)
        .sum();
    assert_eq!((counted, c.params), (params, params));
    let blob = pack_f32(&model).unwrap();
    let m = Model::parse(&blob).unwrap();
    assert_eq!(m.layers().map(|l| l.parameters()).sum::<usize>(), params);
    let mut worst = 0f64;
    for (x, want) in c.inputs.iter().zip(&c.expected.rows) {
        let (_, scores) = run(&m, x);
        for (s, w) in scores.iter().zip(want) {
            worst = worst.max((f64::from(*s) - w).abs());
        }
    }
    assert!(
        worst < 1e-5,
        "{name}: max |runtime f32 - ReferenceEvaluator| = {worst:e}"
    );
}

#[test]
fn gemm_784_100_10_matches_reference_evaluator() {
    check_f32_pack("mlp_784_100_10_gemm", 79_510);
}

#[test]
fn matmul_add_twin_matches_reference_evaluator() {
    check_f32_pack("mlp_784_100_10_matmul", 79_510);
}

#[test]
fn single_softmax_layer_784_10_matches_reference_evaluator() {
    check_f32_pack("single_784_10", 7_850);
}

#[test]
fn int8_pack_of_784_100_10_tracks_the_float_pack() {
    let c = case("mlp_784_100_10_gemm");
    let model = import_file(&path(&format!("tests/fixtures/onnx/{}", c.model))).unwrap();
    let data = Dataset {
        rows: c.inputs.len(),
        width: 784,
        features: c.inputs.concat(),
        labels: None,
        source: "fixture inputs".into(),
    };
    let q = pack_int8(&model, &data, RangeMethod::MinMax).unwrap().blob;
    let mq = Model::parse(&q).unwrap();
    assert_eq!(mq.scratch_bytes(), 884); // max(784, 10) + 100, FORMAT.md §4
    for (x, want) in c.inputs.iter().zip(&c.expected.rows) {
        let (_, scores) = run(&mq, x);
        for (s, w) in scores.iter().zip(want) {
            // Calibrated on the same rows: int8 scores stay within a few hundredths.
            assert!((f64::from(*s) - w).abs() < 0.05, "{s} vs {w}");
        }
    }
}
