//! The runtime's and converter's arithmetic against independent references, case by case.
//!
//! * `requant_cases.csv`: numpy (int64) and plain-Python implementations of the gemmlowp
//!   reference `SaturatingRoundingDoublingHighMul` + `RoundingDivideByPOT` (Jacob et al., 2018,
//!   CVPR, §2.2), by `tests/python/requant_ref.py`.
//! * `multiplier_cases.csv`: `math.frexp` decomposition of real multipliers, same script.
//! * `quantize_linear_cases.csv`: ONNX `QuantizeLinear` (opset 21) run by the onnx package's
//!   `onnx.reference.ReferenceEvaluator`, by `tests/python/quantize_linear_ref.py`;
//!   `quantize_linear_i16_cases.csv` the same operator with an int16 output and zero point 0
//!   (the int16 input tensor of format version 7).
//! * `softmax_cases.json`, `dense_int8_cases.json`: numpy float64 softmax and int64 dense layers,
//!   by `tests/python/dense_ref.py`.
//!
//! CI regenerates every fixture with the pinned reference libraries (`tests/python/run_all.sh`)
//! and fails if any differs from the committed file.
use kinglet_converter::quantise::params::decompose_multiplier;
use kinglet_runtime::unstable::dense::{dense_i8, DenseI8};
use kinglet_runtime::unstable::output::softmax;
use kinglet_runtime::unstable::requant::requantise_reference;
use kinglet_runtime::unstable::scale::{quantize_linear, quantize_linear_i16};
use kinglet_tests::path;

fn rows(rel: &str) -> Vec<Vec<String>> {
    let mut r = csv::Reader::from_path(path(rel)).unwrap();
    r.records()
        .map(|x| x.unwrap().iter().map(String::from).collect())
        .collect()
}

#[test]
fn requantisation_matches_numpy_reference() {
    let cases = rows("tests/fixtures/requant_cases.csv");
    assert!(cases.len() >= 2000);
    for (i, c) in cases.iter().enumerate() {
        let v: Vec<i64> = c.iter().map(|s| s.parse().unwrap()).collect();
        let got = requantise_reference(
            v[0] as i32,
            v[1] as i32,
            v[2] as i8,
            v[3] as i8,
            v[4] as i8,
            v[5] as i8,
        );
        assert_eq!(i64::from(got), v[6], "case {} (line {}): {c:?}", i, i + 2);
    }
}

#[test]
fn multiplier_decomposition_matches_frexp_reference() {
    let cases = rows("tests/fixtures/multiplier_cases.csv");
    assert!(cases.len() >= 300);
    for c in &cases {
        let real: f64 = c[0].parse().unwrap();
        let want = (c[1].parse::<i32>().unwrap(), c[2].parse::<i8>().unwrap());
        assert_eq!(decompose_multiplier(real), Some(want), "real {real:e}");
    }
}

#[test]
fn input_quantisation_matches_onnx_quantize_linear() {
    let cases = rows("tests/fixtures/quantize_linear_cases.csv");
    assert!(cases.len() >= 500);
    for c in &cases {
        let x: f32 = c[0].parse().unwrap();
        let scale: f32 = c[1].parse().unwrap();
        let zp: i8 = c[2].parse().unwrap();
        let want: i8 = c[3].parse().unwrap();
        assert_eq!(
            quantize_linear(x, scale, zp),
            want,
            "x {x:e} scale {scale:e} zp {zp}"
        );
    }
}

/// The int16 input quantisation (`FORMAT.md` §3.6) is ONNX `QuantizeLinear` with an int16
/// output and zero point 0, as the onnx reference evaluator computes it.
#[test]
fn int16_input_quantisation_matches_onnx_quantize_linear() {
    let cases = rows("tests/fixtures/quantize_linear_i16_cases.csv");
    assert!(cases.len() >= 400);
    let mut saturated = 0;
    for c in &cases {
        let x: f32 = c[0].parse().unwrap();
        let scale: f32 = c[1].parse().unwrap();
        let want: i16 = c[2].parse().unwrap();
        saturated += usize::from(want == i16::MAX || want == i16::MIN);
        assert_eq!(
            quantize_linear_i16(x, scale),
            want,
            "x {x:e} scale {scale:e}"
        );
    }
    assert!(saturated >= 10, "{saturated} saturated cases");
}

#[derive(serde::Deserialize)]
struct SoftmaxCase {
    logits: Vec<f32>,
    probs: Vec<f64>,
}

#[test]
fn softmax_matches_numpy_float64() {
    let cases: Vec<SoftmaxCase> = serde_json::from_str(
        &std::fs::read_to_string(path("tests/fixtures/softmax_cases.json")).unwrap(),
    )
    .unwrap();
    for c in &cases {
        let mut s = c.logits.clone();
        softmax(&mut s);
        for (got, want) in s.iter().zip(&c.probs) {
            // Absolute tolerance: f32 arithmetic against float64 (some probabilities underflow).
            assert!(
                (f64::from(*got) - want).abs() < 2e-7,
                "{:?}: {got} vs {want}",
                c.logits
            );
        }
    }
}

#[derive(serde::Deserialize)]
struct DenseCase {
    inputs: usize,
    x: Vec<i8>,
    weights: Vec<i8>,
    bias: Vec<i32>,
    multiplier: Vec<i32>,
    shift: Vec<i8>,
    out_zero_point: i8,
    relu: bool,
    expected: Vec<i8>,
}

#[test]
fn int8_dense_matches_numpy_int64() {
    let cases: Vec<DenseCase> = serde_json::from_str(
        &std::fs::read_to_string(path("tests/fixtures/dense_int8_cases.json")).unwrap(),
    )
    .unwrap();
    assert!(cases.len() >= 20);
    for c in &cases {
        let w: Vec<u8> = c.weights.iter().map(|&v| v as u8).collect();
        let x: Vec<u8> = c.x.iter().map(|&v| v as u8).collect();
        let b: Vec<u8> = c.bias.iter().flat_map(|v| v.to_le_bytes()).collect();
        let m: Vec<u8> = c.multiplier.iter().flat_map(|v| v.to_le_bytes()).collect();
        let s: Vec<u8> = c.shift.iter().map(|&v| v as u8).collect();
        let p = DenseI8 {
            inputs: c.inputs,
            weights: &w,
            bias: &b,
            multiplier: &m,
            shift: &s,
            zero_point: c.out_zero_point,
            act_min: if c.relu { c.out_zero_point } else { -128 },
            act_max: 127,
            table: None,
        };
        let mut out = vec![0u8; c.expected.len()];
        dense_i8(&p, &x, &mut out);
        let got: Vec<i8> = out.iter().map(|&v| v as i8).collect();
        assert_eq!(got, c.expected, "{}x{}", c.expected.len(), c.inputs);
    }
}
