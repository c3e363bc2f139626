//! Blobs written by earlier versions of the packer stay readable (FORMAT.md: stability rule).
//! `tests/fixtures/blobs/v1-*.kgl` were packed at format version 1 and are never regenerated;
//! a reader change that rejects them, or changes their predictions, fails here.
use kinglet_converter::dataset::{load_csv, CsvOptions, LabelColumn};
use kinglet_runtime::{Model, Precision};
use kinglet_tests::{path, run};

fn heldout(example: &str) -> kinglet_converter::dataset::Dataset {
    let opts = CsvOptions {
        label: Some(LabelColumn::Name("label".into())),
        has_header: None,
    };
    load_csv(&path(&format!("examples/{example}/heldout.csv")), &opts).unwrap()
}

#[test]
fn version_1_digits_int8_blob_still_reads_and_predicts() {
    let blob = std::fs::read(path("tests/fixtures/blobs/v1-digits-int8.kgl")).unwrap();
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        (m.precision(), m.input_len(), m.classes()),
        (Precision::Int8, 64, 10)
    );
    let data = heldout("digits");
    let right = (0..data.rows)
        .filter(|&r| run(&m, data.row(r)).0.to_string() == data.labels.as_ref().unwrap()[r])
        .count();
    // 434 of 450 when the fixture was made (the float model's count too).
    assert!(right >= 430, "{right}/450");
}

#[test]
fn version_1_vibration_f32_blob_still_reads_and_predicts() {
    let blob = std::fs::read(path("tests/fixtures/blobs/v1-vibration-f32.kgl")).unwrap();
    let m = Model::parse(&blob).unwrap();
    assert_eq!(
        m.labels().collect::<Vec<_>>(),
        ["normal", "imbalance", "bearing_wear", "loose_mount"]
    );
    let data = heldout("vibration");
    let labels = data.labels.as_ref().unwrap();
    let right = (0..data.rows)
        .filter(|&r| m.label(run(&m, data.row(r)).0) == Some(labels[r].as_str()))
        .count();
    assert!(right >= 585, "{right}/600");
}
