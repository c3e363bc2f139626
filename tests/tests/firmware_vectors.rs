//! The firmware's test vectors on the host (x86-64), against the committed expected lines.
//!
//! `kinglet-fw-vectors` is the same crate the `vectors` firmware runs on Cortex-M0 and
//! Cortex-M4F under QEMU (`scripts/firmware.sh` diffs their output against the same files), so
//! equal lines here and there mean bit-identical results on all three targets.
//!
//! The expected files `tests/fixtures/vectors/<set>.txt` are written by `kinglet score --format
//! vectors` (`tests/fixtures/vectors/regenerate.sh`, checked by `converter/tests/score_vectors.rs`)
//! after a deliberate change to the runtime, the models or the format — never by hand. So the
//! command and the firmware's own line code agree on every line. What keeps them honest is
//! checked against the outside world below: the inputs are the examples' held-out data, the
//! features agree with the numpy reference, and the predicted classes agree with scikit-learn's.
use kinglet_fw_vectors::{assets, format_vector, Line, VectorSet, SETS};
use kinglet_runtime::Model;
use kinglet_tests::path;
use kinglet_vibration_features::{window_features, window_from_le_bytes, FEATURES};

/// Runs every vector of `set`: (lines, predicted classes).
fn run_set(set: &VectorSet) -> (Vec<String>, Vec<usize>) {
    let model = Model::parse(set.model).unwrap_or_else(|e| panic!("{}: {e}", set.name));
    let mut scratch = vec![0u8; model.scratch_bytes()];
    let mut line = Line::new();
    (0..set.count)
        .map(|i| {
            let class = format_vector(set, &model, i, &mut scratch, &mut line)
                .unwrap_or_else(|e| panic!("{} {i}: {e:?}", set.name));
            (line.as_str().to_string(), class)
        })
        .unzip()
}

#[test]
fn vectors_match_the_committed_expected_lines() {
    for set in &SETS {
        let (lines, _) = run_set(set);
        let file = path(&format!("tests/fixtures/vectors/{}.txt", set.name));
        let expected = std::fs::read_to_string(&file).unwrap();
        // The firmware embeds the same file at build time; they must not differ.
        assert_eq!(
            expected, set.expected,
            "{}: rebuild after tests/fixtures/vectors/regenerate.sh",
            set.name
        );
        let want: Vec<&str> = expected.lines().collect();
        assert_eq!(want.len(), set.count, "{}: line count", file.display());
        for (i, (got, want)) in lines.iter().zip(&want).enumerate() {
            assert_eq!(
                got,
                want,
                "{} vector {i} differs from {}",
                set.name,
                file.display()
            );
        }
    }
    let total: usize = SETS.iter().map(|s| s.count).sum();
    assert!(total >= 200, "only {total} vectors");
}

#[test]
fn digits_inputs_are_the_heldout_rows() {
    // The firmware's digits inputs must be examples/digits/heldout.csv (scikit-learn's
    // load_digits split), row for row.
    let rows = kinglet_tests::read_float_csv("examples/digits/heldout.csv");
    assert_eq!(assets::DIGITS_ROWS, 180);
    for (i, row) in rows.iter().take(assets::DIGITS_ROWS).enumerate() {
        let px: Vec<f64> = assets::digits_row(i)
            .unwrap()
            .iter()
            .map(|&p| f64::from(p))
            .collect();
        assert_eq!(&px[..], &row[..64], "digits row {i}");
        assert_eq!(
            f64::from(assets::DIGITS_LABELS[i]),
            row[64],
            "digits label {i}"
        );
    }
}

#[test]
fn replay_windows_are_the_recorded_npy() {
    let file = std::fs::File::open(path("examples/vibration/replay_windows.npy")).unwrap();
    let npy = npyz::NpyFile::new(std::io::BufReader::new(file)).unwrap();
    assert_eq!(npy.shape(), &[64, 3, 128]);
    let samples: Vec<i16> = npy.into_vec().unwrap();
    let bytes: Vec<u8> = samples.iter().flat_map(|s| s.to_le_bytes()).collect();
    assert!(
        bytes == assets::REPLAY_WINDOWS,
        "models/vibration_replay.bin is stale"
    );
    let file = std::fs::File::open(path("examples/vibration/replay_labels.npy")).unwrap();
    let labels: Vec<i64> = npyz::NpyFile::new(std::io::BufReader::new(file))
        .unwrap()
        .into_vec()
        .unwrap();
    let ours: Vec<i64> = assets::REPLAY_LABELS
        .iter()
        .map(|&l| i64::from(l))
        .collect();
    assert_eq!(ours, labels);
}

#[test]
fn window_features_match_the_numpy_reference() {
    // Reference: examples/vibration/features.py (numpy, float64) wrote the features of these
    // windows as the first 64 rows of heldout.csv (README: replay windows are the first 64
    // held-out rows). mean, p2p and zc are exact in f32; rms and mad1 are rounded once or
    // twice, so they agree to within 2 ulp of f32 (relative 2^-22).
    let rows = feature_rows("examples/vibration/heldout.csv", FEATURES);
    assert!(rows.len() >= assets::REPLAY_COUNT);
    for (i, row) in rows.iter().take(assets::REPLAY_COUNT).enumerate() {
        let w = window_from_le_bytes(assets::replay_window(i).unwrap()).unwrap();
        let f = window_features(&w);
        for (k, (&ours, &reference)) in f.iter().zip(row).enumerate() {
            let name = kinglet_vibration_features::FEATURE_NAMES[k];
            match k % 5 {
                1 | 3 => {
                    let rel = ((f64::from(ours) - reference) / reference.abs().max(1e-30)).abs();
                    assert!(
                        rel <= 2f64.powi(-22),
                        "window {i} {name}: {ours} vs {reference}"
                    );
                }
                _ => assert_eq!(f64::from(ours), reference, "window {i} {name}"),
            }
        }
    }
}

/// The first `n` columns of each row of a headered CSV, as f64 (the rest may be text).
fn feature_rows(rel: &str, n: usize) -> Vec<Vec<f64>> {
    let mut r = csv::Reader::from_path(path(rel)).unwrap();
    r.records()
        .enumerate()
        .map(|(row, rec)| {
            rec.unwrap()
                .iter()
                .take(n)
                .map(|v| {
                    v.parse()
                        .unwrap_or_else(|e| panic!("{rel} row {}: {v}: {e}", row + 1))
                })
                .collect()
        })
        .collect()
}

fn argmax(v: &[f64]) -> usize {
    v.iter()
        .enumerate()
        .fold(0, |b, (i, &x)| if x > v[b] { i } else { b })
}

#[test]
fn vector_classes_agree_with_scikit_learn() {
    // scikit-learn's predictions: examples/digits/reference_metrics.json ("predictions", the
    // float MLP on the held-out rows), examples/vibration/expected_proba.csv (predict_proba of
    // the held-out rows) and, for the logistic regression, its predict_proba below. An int8
    // model that agrees on at least 97% of rows is working as intended (rule of thumb, common
    // practice, no source); the f32 models must agree on every row.
    let metrics: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(path("examples/digits/reference_metrics.json")).unwrap(),
    )
    .unwrap();
    let sk_digits: Vec<usize> = metrics["predictions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap() as usize)
        .collect();
    let proba = kinglet_tests::read_float_csv("examples/vibration/expected_proba.csv");
    // The logistic regression's: LogisticRegression.predict_proba of the same held-out rows
    // (tests/fixtures/linear/lr_digits_minmax.json, written by make_linear_cases.py).
    let lr: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(path("tests/fixtures/linear/lr_digits_minmax.json")).unwrap(),
    )
    .unwrap();
    assert!(lr["sklearn"]["source"]
        .as_str()
        .unwrap()
        .contains("predict_proba"));
    let rows = |v: &serde_json::Value| -> Vec<Vec<f64>> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|r| {
                r.as_array()
                    .unwrap()
                    .iter()
                    .map(|x| x.as_f64().unwrap())
                    .collect()
            })
            .collect()
    };
    let sk_lr: Vec<usize> = rows(&lr["sklearn"]["rows"])
        .iter()
        .map(|p| argmax(p))
        .collect();
    // The tanh MLP's: MLPClassifier.predict_proba of the same held-out rows
    // (tests/fixtures/activation/mlp_tanh_digits.json, written by make_activation_cases.py).
    let tanh: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(path("tests/fixtures/activation/mlp_tanh_digits.json")).unwrap(),
    )
    .unwrap();
    assert!(tanh["sklearn"]["source"]
        .as_str()
        .unwrap()
        .contains("predict_proba"));
    let sk_tanh: Vec<usize> = rows(&tanh["sklearn"]["rows"])
        .iter()
        .map(|p| argmax(p))
        .collect();
    // Its rows are the digits example's held-out rows (the same split), row for row.
    let heldout = kinglet_tests::read_float_csv("examples/digits/heldout.csv");
    let lr_rows = rows(&lr["heldout"]);
    assert_eq!(lr_rows.len(), heldout.len());
    for (a, b) in lr_rows.iter().zip(&heldout) {
        assert_eq!(&a[..], &b[..64]);
    }
    let tanh_rows = rows(&tanh["heldout"]);
    assert_eq!(tanh_rows, lr_rows, "the tanh MLP's split is the same");
    for set in &SETS {
        let (_, classes) = run_set(set);
        let range = set.first..set.first + set.count;
        let reference: Vec<usize> = match set.path {
            kinglet_fw_vectors::Path::Vibration => proba[range].iter().map(|p| argmax(p)).collect(),
            _ if set.name.starts_with("lr_") => sk_lr[range].to_vec(),
            _ if set.name.starts_with("tanh_") => sk_tanh[range].to_vec(),
            _ => sk_digits[range].to_vec(),
        };
        let agree = classes
            .iter()
            .zip(&reference)
            .filter(|(a, b)| a == b)
            .count();
        let need = if set.model == assets::DIGITS_FLOAT
            || set.model == assets::LR_DIGITS_FLOAT
            || set.model == assets::TANH_DIGITS_FLOAT
        {
            set.count
        } else {
            (set.count * 97).div_ceil(100)
        };
        assert!(
            agree >= need,
            "{}: {agree} of {} classes agree with scikit-learn (need {need})",
            set.name,
            set.count
        );
    }
}
