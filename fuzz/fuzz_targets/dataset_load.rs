//! Target 5: the calibration/dataset loaders and scaler files. The first byte chooses the
//! loader and its options; the rest is the file's content (written to a temporary file, as the
//! loaders read paths):
//! - 0: CSV, header detected, no label column; 1: CSV, label column 0; 2: CSV, label column
//!   named "label"; 3: CSV, no header, last-ish column label; 4: CSV, forced header;
//! - 5: `.npy` features; 6: `.npy` features plus the same bytes as labels;
//! - 7: scaler JSON (parsed from the text, then attached to a 3-input model).
#![no_main]
use kinglet_converter::dataset::{load_csv, load_npy, CsvOptions, LabelColumn};
use kinglet_converter::graph::Activation;
use kinglet_converter::graph::{DenseLayer, FloatModel};
use kinglet_converter::scaler_file::{attach_scaler, parse_scaler_json};
use kinglet_runtime::OutputKind;
use libfuzzer_sys::fuzz_target;
use std::path::PathBuf;
use std::sync::OnceLock;

fn dir() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        tempfile::tempdir()
            .map(|t| t.keep())
            .unwrap_or_else(|_| std::env::temp_dir())
    })
}

fn three_inputs() -> FloatModel {
    FloatModel {
        input_len: 3,
        scaler: None,
        layers: vec![DenseLayer {
            inputs: 3,
            outputs: 2,
            weights: vec![1.0, 0.0, -1.0, 0.5, 0.5, 0.5],
            bias: vec![0.0, 0.1],
            activation: Activation::Linear,
        }],
        output: OutputKind::Softmax,
        labels: vec![],
    }
}

fuzz_target!(|data: &[u8]| {
    let Some((&sel, body)) = data.split_first() else {
        return;
    };
    let check = |d: &kinglet_converter::dataset::Dataset| {
        assert_eq!(
            d.features.len(),
            d.rows * d.width,
            "ragged dataset accepted"
        );
        assert!(d.rows > 0 && d.width > 0, "empty dataset accepted");
        assert!(
            d.features.iter().all(|v| v.is_finite()),
            "non-finite feature accepted"
        );
        if let Some(l) = &d.labels {
            assert_eq!(l.len(), d.rows);
        }
    };
    match sel % 8 {
        s @ 0..=4 => {
            let p = dir().join("rows.csv");
            if std::fs::write(&p, body).is_err() {
                return;
            }
            let opts = match s {
                0 => CsvOptions::default(),
                1 => CsvOptions {
                    label: Some(LabelColumn::Index(0)),
                    has_header: None,
                },
                2 => CsvOptions {
                    label: Some(LabelColumn::Name("label".into())),
                    has_header: None,
                },
                3 => CsvOptions {
                    label: Some(LabelColumn::Index(2)),
                    has_header: Some(false),
                },
                _ => CsvOptions {
                    label: None,
                    has_header: Some(true),
                },
            };
            if let Ok(d) = load_csv(&p, &opts) {
                check(&d);
            }
        }
        s @ (5 | 6) => {
            let p = dir().join("rows.npy");
            if std::fs::write(&p, body).is_err() {
                return;
            }
            let labels = (s == 6).then_some(p.as_path());
            if let Ok(d) = load_npy(&p, labels) {
                check(&d);
            }
        }
        _ => {
            let Ok(text) = std::str::from_utf8(body) else {
                return;
            };
            if let Ok(s) = parse_scaler_json(text) {
                assert!(!s.offset.is_empty() && !s.scale.is_empty());
                assert!(s.offset.iter().chain(&s.scale).all(|v| v.is_finite()));
                assert!(
                    s.scale.iter().all(|&v| v != 0.0),
                    "zero scale accepted: {s:?}"
                );
                let mut m = three_inputs();
                if attach_scaler(&mut m, s).is_ok() {
                    kinglet_fuzz::convert::pack_and_run(&m, body);
                }
            }
        }
    }
});
