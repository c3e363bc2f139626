//! End-to-end checks of the converter's loaders against committed fixtures made by
//! `tests/python/make_loader_cases.py` (numpy and scikit-learn; see its docstring for sources).

use std::path::{Path, PathBuf};

use kinglet_converter::dataset::{
    load_csv, load_npy, resolve_labels, CsvOptions, Dataset, LabelColumn,
};
use kinglet_converter::graph::{OutputKind, ScalerKind};
use kinglet_converter::import::plain::{import_plain_file, import_plain_str, PlainImportError};
use kinglet_converter::scaler_file::{attach_scaler, load_scaler_file};
use serde::Deserialize;

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/loaders")
}

fn read_json<T: for<'de> Deserialize<'de>>(name: &str) -> T {
    let text = std::fs::read_to_string(dir().join(name)).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn f32_row(r: &[f64]) -> Vec<f32> {
    r.iter().map(|&v| v as f32).collect()
}

fn max_abs_diff(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max)
}

#[derive(Deserialize)]
struct ScalerExpected {
    rows: Vec<Vec<f64>>,
    standard: Vec<Vec<f64>>,
    minmax: Vec<Vec<f64>>,
}

/// Reference: scikit-learn `StandardScaler.transform` on iris rows (rounded to f32 first).
#[test]
fn standard_scaler_file_matches_scikit_learn() {
    let exp: ScalerExpected = read_json("iris_scalers_expected.json");
    let s = load_scaler_file(&dir().join("iris_standard_scaler.json")).unwrap();
    assert_eq!(s.kind, ScalerKind::Standardise);
    assert_eq!(s.offset.len(), 4);
    for (row, want) in exp.rows.iter().zip(&exp.standard) {
        let got: Vec<f64> = s.apply(&f32_row(row)).into_iter().map(f64::from).collect();
        let d = max_abs_diff(&got, want);
        assert!(d < 1e-6, "row {row:?}: off by {d}");
    }
}

/// Reference: scikit-learn `MinMaxScaler(feature_range=(-1, 1)).transform` on iris rows.
#[test]
fn minmax_scaler_file_matches_scikit_learn() {
    let exp: ScalerExpected = read_json("iris_scalers_expected.json");
    let s = load_scaler_file(&dir().join("iris_minmax_scaler.json")).unwrap();
    assert_eq!(s.kind, ScalerKind::MinMax);
    for (row, want) in exp.rows.iter().zip(&exp.minmax) {
        let got: Vec<f64> = s.apply(&f32_row(row)).into_iter().map(f64::from).collect();
        let d = max_abs_diff(&got, want);
        assert!(d < 1e-6, "row {row:?}: off by {d}");
    }
}

#[test]
fn uniform_scaler_files() {
    let s = load_scaler_file(&dir().join("divide_by_255.json")).unwrap();
    assert_eq!(s.kind, ScalerKind::Uniform);
    let got = s.apply(&[0.0, 51.0, 255.0]);
    for (g, x) in got.iter().zip([0.0f32, 51.0, 255.0]) {
        assert!((g - x / 255.0).abs() < 1e-7, "{g} vs {}", x / 255.0);
    }
    let s = load_scaler_file(&dir().join("factor_offset.json")).unwrap();
    assert_eq!(s.kind, ScalerKind::Uniform);
    assert_eq!(s.apply(&[100.0]), vec![100.0 * 0.00392f32]);
}

#[derive(Deserialize)]
struct ModelsExpected {
    inputs: Vec<Vec<f64>>,
    iris_mlp: Vec<Vec<f64>>,
    iris_binary: Vec<Vec<f64>>,
}

/// Reference: numpy forward pass with exact (math.fsum) dot products, cross-checked in the
/// script against scikit-learn `MLPClassifier.predict_proba` with the same weights.
fn check_forward(model: &kinglet_converter::graph::FloatModel, want: &[Vec<f64>]) {
    let exp: ModelsExpected = read_json("models_expected.json");
    assert_eq!(exp.inputs.len(), want.len());
    for (x, w) in exp.inputs.iter().zip(want) {
        let got = model.forward_reference(&f32_row(x));
        let d = max_abs_diff(&got, w);
        // Both sides use the same f32 weights and f32 scaler; only f64 summation order differs.
        assert!(d < 1e-9, "input {x:?}: off by {d}");
    }
}

#[test]
fn keras_layout_inline_model_matches_numpy() {
    let exp: ModelsExpected = read_json("models_expected.json");
    let m = import_plain_file(&dir().join("iris_mlp_inline.json")).unwrap();
    assert_eq!(m.input_len, 4);
    assert_eq!(m.output, OutputKind::Softmax);
    assert_eq!(m.labels, vec!["setosa", "versicolor", "virginica"]);
    assert_eq!(
        m.layers.iter().map(|l| l.outputs).collect::<Vec<_>>(),
        vec![6, 5, 3]
    );
    assert_eq!(
        m.scaler.as_ref().map(|s| s.kind),
        Some(ScalerKind::Standardise)
    );
    check_forward(&m, &exp.iris_mlp);
}

#[test]
fn npy_model_equals_inline_model() {
    let exp: ModelsExpected = read_json("models_expected.json");
    let inline = import_plain_file(&dir().join("iris_mlp_inline.json")).unwrap();
    let npy = import_plain_file(&dir().join("iris_mlp_npy.json")).unwrap();
    assert_eq!(npy, inline);
    check_forward(&npy, &exp.iris_mlp);
}

#[test]
fn binary_sigmoid_model_with_minmax_scaler() {
    let exp: ModelsExpected = read_json("models_expected.json");
    let m = import_plain_file(&dir().join("iris_binary_npy.json")).unwrap();
    assert_eq!(m.output, OutputKind::Sigmoid);
    assert_eq!(m.classes(), 2);
    assert_eq!(m.labels, vec!["other", "virginica"]);
    assert_eq!(m.scaler.as_ref().map(|s| s.kind), Some(ScalerKind::MinMax));
    check_forward(&m, &exp.iris_binary);
}

#[test]
fn separately_saved_scaler_attaches_like_an_inline_one() {
    let inline = import_plain_file(&dir().join("iris_mlp_inline.json")).unwrap();
    let mut bare = inline.clone();
    bare.scaler = None;
    let s = load_scaler_file(&dir().join("iris_standard_scaler.json")).unwrap();
    attach_scaler(&mut bare, s.clone()).unwrap();
    assert_eq!(bare, inline);
    assert!(
        attach_scaler(&mut bare, s).is_err(),
        "a second scaler must be refused"
    );
}

#[test]
fn transposed_npy_kernel_is_refused_with_file_and_shapes() {
    let text = std::fs::read_to_string(dir().join("iris_mlp_npy.json")).unwrap();
    // Declare the first Keras kernel (shape [4, 6]) as PyTorch layout.
    let text = text.replacen("\"in_out\"", "\"out_in\"", 1);
    let e = import_plain_str(&text, &dir()).unwrap_err();
    assert!(
        matches!(e, PlainImportError::NpyShape { layer: 0, .. }),
        "{e}"
    );
    let msg = e.to_string();
    assert!(
        msg.contains(
            "iris_mlp_k0_f32.npy: shape [4, 6], but layout out_in ([outputs, inputs]) needs [6, 4]"
        ),
        "{msg}"
    );
}

#[derive(Deserialize)]
struct DatasetsExpected {
    iris_x: Vec<Vec<f64>>,
    iris_y: Vec<usize>,
    iris_names: Vec<String>,
    digits_x: Vec<Vec<i64>>,
    digits_y: Vec<usize>,
}

fn check_iris(d: &Dataset, exp: &DatasetsExpected) {
    assert_eq!((d.rows, d.width), (exp.iris_x.len(), 4));
    for (i, row) in exp.iris_x.iter().enumerate() {
        assert_eq!(d.row(i), f32_row(row).as_slice(), "row {i}");
    }
    let labels = d.labels.as_ref().unwrap();
    assert_eq!(
        resolve_labels(labels, &exp.iris_names, 3).unwrap(),
        exp.iris_y
    );
}

/// Reference: iris rows from `sklearn.datasets.load_iris`, written by Python's csv module.
#[test]
fn iris_csv_with_label_by_name_or_index() {
    let exp: DatasetsExpected = read_json("datasets_expected.json");
    let path = dir().join("iris_sample.csv");
    let by_name = CsvOptions {
        label: Some(LabelColumn::Name("species".into())),
        has_header: None,
    };
    let d = load_csv(&path, &by_name).unwrap();
    check_iris(&d, &exp);
    let by_index = CsvOptions {
        label: Some("4".parse().unwrap()),
        has_header: None,
    };
    assert_eq!(load_csv(&path, &by_index).unwrap(), d);
    let m = import_plain_file(&dir().join("iris_mlp_inline.json")).unwrap();
    d.check_width(m.input_len).unwrap();
    // Without a label column the species names are non-numeric: the error names line and column.
    let e = load_csv(&path, &CsvOptions::default())
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("line 2, column 'species': \"setosa\" is not a number"),
        "{e}"
    );
}

/// Reference: the same rows saved by `numpy.save` as float32 (C order) and float64 (Fortran order).
#[test]
fn iris_npy_float32_float64_fortran() {
    let exp: DatasetsExpected = read_json("datasets_expected.json");
    let d = load_npy(
        &dir().join("iris_x_f32.npy"),
        Some(&dir().join("iris_y_str.npy")),
    )
    .unwrap();
    check_iris(&d, &exp);
    let d64 = load_npy(
        &dir().join("iris_x_f64_fortran.npy"),
        Some(&dir().join("iris_y_int64.npy")),
    )
    .unwrap();
    check_iris(&d64, &exp);
    assert_eq!(d64.features, d.features);
}

/// Reference: `sklearn.datasets.load_digits` rows 0-9 saved as int64.
#[test]
fn digits_npy_int64() {
    let exp: DatasetsExpected = read_json("datasets_expected.json");
    let d = load_npy(
        &dir().join("digits_x_int64.npy"),
        Some(&dir().join("digits_y_int64.npy")),
    )
    .unwrap();
    assert_eq!((d.rows, d.width), (10, 64));
    for (i, row) in exp.digits_x.iter().enumerate() {
        let want: Vec<f32> = row.iter().map(|&v| v as f32).collect();
        assert_eq!(d.row(i), want.as_slice(), "row {i}");
    }
    assert_eq!(
        resolve_labels(d.labels.as_ref().unwrap(), &[], 10).unwrap(),
        exp.digits_y
    );
    assert!(d.check_width(4).is_err());
}

/// The first JSON block of `docs/plain-model-format.md` (the full example) imports, with the
/// `.npy` files it names (written by the fixture script), and keeps its promises.
#[test]
fn documented_full_example_imports() {
    let doc_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../docs/plain-model-format.md");
    let doc = std::fs::read_to_string(doc_path).unwrap();
    let start = doc.find("```json\n").expect("a json block") + "```json\n".len();
    let len = doc[start..].find("```").expect("end of the json block");
    let json = &doc[start..start + len];
    let m = import_plain_str(json, &dir().join("doc_example")).unwrap();
    assert_eq!(m.input_len, 4);
    assert_eq!(
        m.layers
            .iter()
            .map(|l| (l.inputs, l.outputs))
            .collect::<Vec<_>>(),
        vec![(4, 8), (8, 3)]
    );
    assert_eq!(m.output, OutputKind::Softmax);
    assert_eq!(m.labels.len(), 3);
    assert_eq!(
        m.scaler.as_ref().map(|s| s.kind),
        Some(ScalerKind::Standardise)
    );
    let p = m.forward_reference(&[5.1, 3.5, 1.4, 0.2]);
    assert_eq!(p.len(), 3);
    assert!((p.iter().sum::<f64>() - 1.0).abs() < 1e-12);
}
