//! Shared helpers for the end-to-end tests: paths to the repository's examples and fixtures,
//! and running packed models through the runtime.
use kinglet_runtime::{Input, Model};
use std::path::PathBuf;

/// The repository root.
pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// A path under the repository root.
pub fn path(rel: &str) -> PathBuf {
    repo().join(rel)
}

/// Runs one row through a model; returns the predicted class and the scores.
pub fn run(model: &Model<'_>, row: &[f32]) -> (usize, Vec<f32>) {
    let mut scratch = vec![0u8; model.scratch_bytes()];
    let mut scores = vec![0f32; model.output_len()];
    let p = model
        .infer(Input::F32(row), &mut scratch, &mut scores)
        .unwrap_or_else(|e| panic!("inference failed: {e}"));
    (p.class, scores)
}

/// Reads a headered CSV of floats into rows.
pub fn read_float_csv(rel: &str) -> Vec<Vec<f64>> {
    let mut r = csv::Reader::from_path(path(rel)).unwrap_or_else(|e| panic!("{rel}: {e}"));
    r.records()
        .map(|rec| {
            rec.unwrap_or_else(|e| panic!("{rel}: {e}"))
                .iter()
                .map(|v| {
                    v.parse::<f64>()
                        .unwrap_or_else(|e| panic!("{rel}: {v}: {e}"))
                })
                .collect()
        })
        .collect()
}

/// The output kind a fixture's expectations name (`softmax`, `sigmoid`, `logits`, `one_vs_rest`).
pub fn output_kind(s: &str) -> kinglet_converter::graph::OutputKind {
    use kinglet_converter::graph::OutputKind;
    match s {
        "softmax" => OutputKind::Softmax,
        "sigmoid" => OutputKind::Sigmoid,
        "logits" => OutputKind::Logits,
        "one_vs_rest" => OutputKind::OneVsRest,
        other => panic!("unknown output kind {other}"),
    }
}

/// The scaler kind a fixture's expectations name.
pub fn scaler_kind(s: &str) -> kinglet_converter::graph::ScalerKind {
    use kinglet_converter::graph::ScalerKind;
    match s {
        "Standardise" => ScalerKind::Standardise,
        "MinMax" => ScalerKind::MinMax,
        "Uniform" => ScalerKind::Uniform,
        "Affine" => ScalerKind::Affine,
        other => panic!("unknown scaler kind {other}"),
    }
}

/// A reference library's output on a fixture's rows, as the Python fixture scripts write it:
/// which library and version made it (`source`), and one row of outputs per input row.
#[derive(Debug, Clone, serde::Deserialize)]
pub struct Reference {
    /// The library and version that computed the rows (e.g. scikit-learn's `predict_proba`).
    pub source: String,
    /// One row of outputs per input row.
    pub rows: Vec<Vec<f64>>,
}

/// Fixture rows as an unlabelled [`kinglet_converter::dataset::Dataset`].
pub fn rows_dataset(rows: &[Vec<f32>]) -> kinglet_converter::dataset::Dataset {
    kinglet_converter::dataset::Dataset {
        rows: rows.len(),
        width: rows.first().map_or(0, Vec::len),
        features: rows.concat(),
        labels: None,
        source: "fixture".into(),
    }
}

/// A blob's scores laid out as a reference's `want` columns: a sigmoid model's `p` as
/// `[1 - p, p]` (scikit-learn's two-class `predict_proba`), a binary raw-score model's
/// `[-s, s]` as `s` (scikit-learn's one-column `decision_function`).
pub fn as_columns(scores: &[f32], want: usize) -> Vec<f64> {
    let s: Vec<f64> = scores.iter().map(|&v| f64::from(v)).collect();
    match (s.as_slice(), want) {
        ([p], 2) => vec![1.0 - p, *p],
        ([_, pos], 1) => vec![*pos],
        _ => s,
    }
}
