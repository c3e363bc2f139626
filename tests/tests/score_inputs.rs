//! The inputs `tests/fixtures/vectors/regenerate.sh` gives `kinglet score` for the firmware's
//! vibration vectors: `tests/fixtures/vectors/vibration_features.npy`, the 15 f32 features of
//! each recorded window exactly as the firmware computes them (`window_features`, the same
//! crate the firmware links), shape (64, 15), float32.
//!
//! With `KINGLET_BLESS=1` this test writes the file; otherwise it checks the committed file
//! byte for byte. How far those features are from the numpy reference is checked in
//! `firmware_vectors.rs` (`window_features_match_the_numpy_reference`).
use kinglet_fw_vectors::assets;
use kinglet_tests::path;
use kinglet_vibration_features::{window_features, window_from_le_bytes, FEATURES};
use npyz::WriterBuilder;

fn features_npy() -> Vec<u8> {
    let mut values = Vec::new();
    for i in 0..assets::REPLAY_COUNT {
        let w = window_from_le_bytes(assets::replay_window(i).unwrap()).unwrap();
        values.extend(window_features(&w));
    }
    let mut bytes = Vec::new();
    let mut w = npyz::WriteOptions::new()
        .default_dtype()
        .shape(&[assets::REPLAY_COUNT as u64, FEATURES as u64])
        .writer(&mut bytes)
        .begin_nd()
        .unwrap();
    w.extend(values).unwrap();
    w.finish().unwrap();
    bytes
}

#[test]
fn vibration_features_are_the_firmwares() {
    let file = path("tests/fixtures/vectors/vibration_features.npy");
    let ours = features_npy();
    if std::env::var_os("KINGLET_BLESS").is_some() {
        std::fs::write(&file, &ours).unwrap();
    }
    let committed = std::fs::read(&file).unwrap();
    assert!(
        committed == ours,
        "{} is stale; rerun with KINGLET_BLESS=1",
        file.display()
    );
    // The labels beside them are the recorded ones, as class indices.
    let labels = std::fs::File::open(path("examples/vibration/replay_labels.npy")).unwrap();
    let labels: Vec<i64> = npyz::NpyFile::new(std::io::BufReader::new(labels))
        .unwrap()
        .into_vec()
        .unwrap();
    assert_eq!(labels.len(), assets::REPLAY_COUNT);
}
