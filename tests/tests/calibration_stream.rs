//! The streamed calibration (`.npy` rows read a chunk at a time on each of three passes, no
//! traced value kept) gives the whole-file calibration's ranges, statistics, means, warnings
//! and blob bit for bit. The whole-file calibration is the one checked against numpy
//! (`calibration_refs.rs`, `tests/fixtures/calib/calib_cases.json`) and scikit-learn
//! (`calibration_digits.rs`, `vet_digits.rs`); here both run on the digits example's rows
//! (`sklearn.datasets.load_digits`, as `examples/digits/make_model.py` split them).
use kinglet_converter::dataset::{
    load_csv, load_file, CsvOptions, Dataset, LabelColumn, LoadOptions,
};
use kinglet_converter::graph::{Activation, DenseLayer, FloatModel, Pointwise, PointwiseKind};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{
    pack_f32, pack_int8_options, pack_int8_streamed, FoldScaler, Int8Options, Int8Pack, Sections,
};
use kinglet_converter::quantise::calibrate::{calibrate, RangeMethod};
use kinglet_converter::quantise::calibrate_stream::{calibrate_streamed, FilePasses};
use kinglet_runtime::unstable::wire::format::OutputKind;
use kinglet_runtime::Model;
use kinglet_tests::path;

fn csv(rel: &str, label: bool) -> Dataset {
    load_csv(
        &path(rel),
        &CsvOptions {
            label: label.then(|| LabelColumn::Name("label".into())),
            has_header: None,
        },
    )
    .unwrap()
}

fn save(d: &Dataset, file: &std::path::Path) {
    use npyz::WriterBuilder;
    let mut buf = Vec::new();
    {
        let mut w = npyz::WriteOptions::<f32>::new()
            .default_dtype()
            .shape(&[d.rows as u64, d.width as u64])
            .writer(&mut buf)
            .begin_nd()
            .unwrap();
        w.extend(d.features.iter().copied()).unwrap();
        w.finish().unwrap();
    }
    std::fs::write(file, buf).unwrap();
}

/// A 64 → 12 (tanh) → 10 model with fixed pseudo-random weights: a pointwise layer, whose
/// pre-activation range is calibrated too.
fn tanh_model() -> FloatModel {
    let w = |n: usize, seed: usize| -> Vec<f32> {
        (0..n)
            .map(|i| ((i * 7919 + seed * 104_729) % 2001) as f32 / 1000.0 - 1.0)
            .map(|x| x * 0.2)
            .collect()
    };
    FloatModel {
        input_len: 64,
        scaler: None,
        layers: vec![
            DenseLayer {
                inputs: 64,
                outputs: 12,
                weights: w(64 * 12, 1),
                bias: w(12, 2),
                activation: Activation::Pointwise(Pointwise {
                    kind: PointwiseKind::Tanh,
                    params: [0.0, 0.0],
                }),
            },
            DenseLayer {
                inputs: 12,
                outputs: 10,
                weights: w(120, 3),
                bias: w(10, 4),
                activation: Activation::Linear,
            },
        ],
        output: OutputKind::Softmax,
        labels: vec![],
    }
}

fn same(a: &Int8Pack, b: &Int8Pack, what: &str) {
    assert_eq!(a.ranges, b.ranges, "{what}");
    assert_eq!(a.tensors, b.tensors, "{what}");
    assert_eq!(a.warnings, b.warnings, "{what}");
    assert_eq!(a.calibration_rows, b.calibration_rows, "{what}");
    assert_eq!(a.blob, b.blob, "{what}");
}

#[test]
fn streamed_packs_equal_whole_file_packs() {
    let dir = tempfile::tempdir().unwrap();
    let digits = import_file(&path("examples/digits/model.onnx")).unwrap();
    let calib = csv("examples/digits/calibration.csv", false);
    // The held-out rows with one row scaled up 40 times: far values that dominate ranges,
    // so the statistics and the warnings are not all zero.
    let mut outlier = csv("examples/digits/heldout.csv", true);
    outlier.labels = None;
    for v in &mut outlier.features[64 * 5..64 * 6] {
        *v *= 40.0;
    }
    let mut warned = 0;
    for (name, data) in [("calibration", &calib), ("outlier", &outlier)] {
        let file = dir.path().join(format!("{name}.npy"));
        save(data, &file);
        for model in [&digits, &tanh_model()] {
            for method in [
                RangeMethod::MinMax,
                RangeMethod::Percentile(99.99),
                RangeMethod::Percentile(99.0),
                RangeMethod::Percentile(75.0),
            ] {
                for bias_correction in [false, true] {
                    let opts = Int8Options {
                        method,
                        bias_correction,
                        fold_scaler: FoldScaler::No,
                        sections: Sections::ALL,
                        weights: Default::default(),
                        ..method.into()
                    };
                    let loaded = load_file(&file, &LoadOptions::default()).unwrap();
                    let whole = pack_int8_options(model, &loaded, opts, &|_| {}).unwrap();
                    // 37 rows a chunk: many chunks, the last one short.
                    let passes = FilePasses::open(&file, &LoadOptions::default(), 37)
                        .unwrap()
                        .unwrap();
                    let streamed = pack_int8_streamed(model, &passes, opts, &|_| {})
                        .unwrap()
                        .unwrap();
                    let what = format!(
                        "{name}, {} layers, {method}, bias {bias_correction}",
                        model.layers.len()
                    );
                    same(&whole, &streamed, &what);
                    warned += usize::from(!whole.warnings.is_empty());
                }
            }
        }
    }
    assert!(warned > 0);
    // The CSV files themselves, streamed (the held-out file's label column left out).
    for (rel, label) in [
        ("examples/digits/calibration.csv", None),
        (
            "examples/digits/heldout.csv",
            Some(LabelColumn::Name("label".into())),
        ),
    ] {
        let opts = LoadOptions {
            label,
            ..LoadOptions::default()
        };
        let file = path(rel);
        let loaded = load_file(&file, &opts).unwrap();
        for method in [RangeMethod::MinMax, RangeMethod::Percentile(99.9)] {
            let o = Int8Options {
                method,
                bias_correction: true,
                fold_scaler: FoldScaler::No,
                sections: Sections::default(),
                weights: Default::default(),
                ..method.into()
            };
            let whole = pack_int8_options(&digits, &loaded, o, &|_| {}).unwrap();
            let passes = FilePasses::open(&file, &opts, 100).unwrap().unwrap();
            let streamed = pack_int8_streamed(&digits, &passes, o, &|_| {})
                .unwrap()
                .unwrap();
            same(&whole, &streamed, &format!("{rel}, {method}"));
        }
    }
}

#[test]
fn streamed_calibration_keeps_the_means_and_pre_activation_ranges() {
    let model = tanh_model();
    let data = csv("examples/digits/calibration.csv", false);
    let blob = pack_f32(&model).unwrap();
    let float = Model::parse(&blob).unwrap();
    for method in [RangeMethod::MinMax, RangeMethod::Percentile(99.9)] {
        let whole = calibrate(&float, &data, method).unwrap();
        let s = calibrate_streamed(&float, &data, method, model.layers.first(), &|_| {}).unwrap();
        assert!(s.biases_lost.is_none());
        let c = s.calibration;
        assert_eq!(c.means, whole.means);
        assert_eq!(c.pre_activation, whole.pre_activation);
        assert!(c.pre_activation[0].is_some());
        assert_eq!((c.ranges, c.tensors), (whole.ranges, whole.tensors));
    }
}

#[test]
fn rows_the_bias_check_refuses_and_least_error_go_to_the_whole_file() {
    let dir = tempfile::tempdir().unwrap();
    let digits = import_file(&path("examples/digits/model.onnx")).unwrap();
    let mut data = csv("examples/digits/calibration.csv", false);
    let file = dir.path().join("rows.npy");
    let opts = |method| Int8Options {
        method,
        bias_correction: false,
        fold_scaler: FoldScaler::No,
        sections: Sections::default(),
        weights: Default::default(),
        ..method.into()
    };
    save(&data, &file);
    let passes = FilePasses::open(&file, &LoadOptions::default(), 50)
        .unwrap()
        .unwrap();
    assert!(
        pack_int8_streamed(&digits, &passes, opts(RangeMethod::LeastError), &|_| {})
            .unwrap()
            .is_none()
    );
    // One row of 1e12: its first-layer terms drown every bias (the whole-file pack names it).
    for v in &mut data.features[..64] {
        *v = 1e12;
    }
    save(&data, &file);
    let passes = FilePasses::open(&file, &LoadOptions::default(), 50)
        .unwrap()
        .unwrap();
    assert!(
        pack_int8_streamed(&digits, &passes, opts(RangeMethod::MinMax), &|_| {})
            .unwrap()
            .is_none()
    );
    let loaded = load_file(&file, &LoadOptions::default()).unwrap();
    let e = pack_int8_options(&digits, &loaded, opts(RangeMethod::MinMax), &|_| {}).unwrap_err();
    assert!(e.to_string().contains("drown every bias"), "{e}");
    // A row the float model cannot run: the same error either way.
    for v in &mut data.features[..64] {
        *v = 3e38;
    }
    save(&data, &file);
    let passes = FilePasses::open(&file, &LoadOptions::default(), 50)
        .unwrap()
        .unwrap();
    let e1 = pack_int8_streamed(&digits, &passes, opts(RangeMethod::MinMax), &|_| {}).unwrap_err();
    let loaded = load_file(&file, &LoadOptions::default()).unwrap();
    let e2 = pack_int8_options(&digits, &loaded, opts(RangeMethod::MinMax), &|_| {}).unwrap_err();
    assert_eq!(format!("{e1:#}"), format!("{e2:#}"));
}
