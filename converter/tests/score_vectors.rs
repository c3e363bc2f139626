//! The firmware's committed test vectors (`tests/fixtures/vectors/*.txt`, the lines the
//! `vectors` firmware must print under QEMU on Cortex-M0 and Cortex-M4F, `scripts/firmware.sh`)
//! against the real `kinglet` binary:
//!
//! - `tests/fixtures/vectors/regenerate.sh` runs `kinglet score --format vectors` and must
//!   reproduce every committed file byte for byte (with `KINGLET_BLESS=1` it rewrites them:
//!   that is how the fixtures are made);
//! - independently of the vector formatter, `kinglet score --format json` gives every line's
//!   class, score bits and raw outputs;
//! - `kinglet vet --feed u8 --entry classify` reports, for the digits rows the firmware feeds
//!   as `u8`, the classes of the firmware's `u8` vectors.
//!
//! The firmware's rows are the examples' held-out rows (`tests/tests/firmware_vectors.rs` checks
//! `digits_heldout_u8.bin` against `examples/digits/heldout.csv`) and the features of its
//! recorded windows (`tests/tests/score_inputs.rs` checks `vibration_features.npy`).
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

fn kinglet(args: &[&str]) -> Output {
    let o = Command::new(env!("CARGO_BIN_EXE_kinglet"))
        .args(args)
        .current_dir(repo(""))
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    o
}

/// The committed sets: name, blob, data arguments, feed.
const SETS: [(&str, &str, &[&str], &str); 11] = [
    (
        "digits_u8",
        "firmware-example/models/digits.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "0..150",
        ],
        "u8",
    ),
    (
        "digits_f32",
        "firmware-example/models/digits.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "150..170",
        ],
        "f32",
    ),
    (
        "digits_float",
        "firmware-example/models/digits_float.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "170..180",
        ],
        "f32",
    ),
    (
        "vibration",
        "firmware-example/models/vibration.kgl",
        &[
            "--data",
            "tests/fixtures/vectors/vibration_features.npy",
            "--label-file",
            "examples/vibration/replay_labels.npy",
        ],
        "f32",
    ),
    (
        "lr_digits_u8",
        "firmware-example/models/lr_digits.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "0..60",
        ],
        "u8",
    ),
    (
        "lr_digits_float",
        "firmware-example/models/lr_digits_float.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "60..70",
        ],
        "f32",
    ),
    (
        "tanh_digits_u8",
        "firmware-example/models/tanh_digits.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "0..40",
        ],
        "u8",
    ),
    (
        "int4_digits_u8",
        "firmware-example/models/int4_digits.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "50..90",
        ],
        "u8",
    ),
    (
        "digits_int16_input_u8",
        "firmware-example/models/digits_int16_input.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "90..130",
        ],
        "u8",
    ),
    (
        "digits_int16_input_f32",
        "firmware-example/models/digits_int16_input.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "130..150",
        ],
        "f32",
    ),
    (
        "tanh_digits_float",
        "firmware-example/models/tanh_digits_float.kgl",
        &[
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--rows",
            "40..50",
        ],
        "f32",
    ),
];

fn committed(set: &str) -> String {
    std::fs::read_to_string(repo(&format!("tests/fixtures/vectors/{set}.txt"))).unwrap()
}

#[cfg(unix)]
#[test]
fn the_committed_vectors_are_what_kinglet_score_writes() {
    let bless = std::env::var_os("KINGLET_BLESS").is_some();
    let dir = tempfile::tempdir().unwrap();
    let mut cmd = Command::new("bash");
    cmd.arg(repo("tests/fixtures/vectors/regenerate.sh"))
        .env("KINGLET", env!("CARGO_BIN_EXE_kinglet"));
    if !bless {
        cmd.arg(dir.path());
    }
    let o = cmd.output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    if bless {
        return;
    }
    let mut lines = 0;
    for (set, ..) in SETS {
        let ours = std::fs::read_to_string(dir.path().join(format!("{set}.txt"))).unwrap();
        let want = committed(set);
        for (i, (a, b)) in ours.lines().zip(want.lines()).enumerate() {
            assert_eq!(a, b, "{set} line {i}");
        }
        assert_eq!(
            ours, want,
            "{set}: rerun tests/fixtures/vectors/regenerate.sh"
        );
        lines += want.lines().count();
    }
    assert_eq!(lines, 464);
}

/// One committed line's fields.
struct VectorLine {
    label: usize,
    class: usize,
    score_bits: u32,
    out: Vec<String>,
}

fn parse(line: &str) -> VectorLine {
    let field = |key: &str| {
        line.split(' ')
            .find_map(|w| w.strip_prefix(key))
            .unwrap_or_else(|| panic!("no {key} in {line}"))
    };
    VectorLine {
        label: field("label=").parse().unwrap(),
        class: field("class=").parse().unwrap(),
        score_bits: u32::from_str_radix(field("score="), 16).unwrap(),
        out: field("out=").split(',').map(str::to_string).collect(),
    }
}

#[test]
fn json_classes_scores_and_outputs_equal_every_committed_line() {
    let mut checked = 0;
    for (set, blob, data, feed) in SETS {
        let mut args = vec!["score", blob, "--feed", feed, "--format", "json"];
        args.extend_from_slice(data);
        let v: serde_json::Value = serde_json::from_slice(&kinglet(&args).stdout).unwrap();
        let rows = v["rows"].as_array().unwrap();
        let want = committed(set);
        assert_eq!(rows.len(), want.lines().count(), "{set}");
        for (i, (row, line)) in rows.iter().zip(want.lines()).enumerate() {
            let l = parse(line);
            let class = row["class"].as_u64().unwrap() as usize;
            assert_eq!(class, l.class, "{set} {i} class");
            assert_eq!(
                row["truth"].as_u64().unwrap() as usize,
                l.label,
                "{set} {i} label"
            );
            // The JSON holds each f32's exact value; the line, its bits.
            let score = row["scores"][class].as_f64().unwrap() as f32;
            assert_eq!(score.to_bits(), l.score_bits, "{set} {i} score");
            let outs = row["outputs"].as_array().unwrap();
            assert_eq!(outs.len(), l.out.len(), "{set} {i}");
            for (k, (o, w)) in outs.iter().zip(&l.out).enumerate() {
                let ours = if v["precision"] == "int8" {
                    o.as_i64().unwrap().to_string()
                } else {
                    format!("{:08x}", (o.as_f64().unwrap() as f32).to_bits())
                };
                assert_eq!(&ours, w, "{set} {i} out {k}");
            }
            checked += 1;
        }
    }
    assert_eq!(checked, 464);
}

#[test]
fn vet_through_u8_and_classify_reports_the_firmwares_u8_classes() {
    let o = kinglet(&[
        "vet",
        "examples/digits/model.onnx",
        "firmware-example/models/digits.kgl",
        "--data",
        "examples/digits/heldout.csv",
        "--label",
        "label",
        "--feed",
        "u8",
        "--entry",
        "classify",
        "--json",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["measured"]["feed"], "u8");
    assert_eq!(v["measured"]["entry"], "classify");
    assert_eq!(v["measured"]["int8_call"], "Model::classify(Input::U8)");
    let int8: Vec<usize> = v["predictions"]["int8"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_u64().unwrap() as usize)
        .collect();
    assert_eq!(int8.len(), 450);
    // digits_u8 is held-out rows 0..150 through Input::U8.
    let firmware: Vec<usize> = committed("digits_u8")
        .lines()
        .map(|l| parse(l).class)
        .collect();
    assert_eq!(firmware.len(), 150);
    assert_eq!(&int8[..150], &firmware[..]);
    assert_eq!(v["entry_split"]["rows"], 0);

    // And through f32 and infer, digits_f32's rows 150..170.
    let o = kinglet(&[
        "vet",
        "examples/digits/model.onnx",
        "firmware-example/models/digits.kgl",
        "--data",
        "examples/digits/heldout.csv",
        "--label",
        "label",
        "--json",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["measured"]["int8_call"], "Model::infer(Input::F32)");
    let int8: Vec<u64> = v["predictions"]["int8"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_u64().unwrap())
        .collect();
    let firmware: Vec<u64> = committed("digits_f32")
        .lines()
        .map(|l| parse(l).class as u64)
        .collect();
    assert_eq!(&int8[150..170], &firmware[..]);
}

#[test]
fn vet_reports_the_firmwares_classes_of_the_int16_input_model() {
    // The int16-input blob (format version 7) through u8 and classify: held-out rows 90..130
    // are digits_int16_input_u8; through f32 and infer, rows 130..150 are
    // digits_int16_input_f32.
    let blob = "firmware-example/models/digits_int16_input.kgl";
    for (feed_args, set, rows) in [
        (
            &["--feed", "u8", "--entry", "classify"][..],
            "digits_int16_input_u8",
            90..130,
        ),
        (&[][..], "digits_int16_input_f32", 130..150),
    ] {
        let mut args = vec![
            "vet",
            "examples/digits/model.onnx",
            blob,
            "--data",
            "examples/digits/heldout.csv",
            "--label",
            "label",
            "--json",
        ];
        args.extend_from_slice(feed_args);
        let v: serde_json::Value = serde_json::from_slice(&kinglet(&args).stdout).unwrap();
        let int8: Vec<usize> = v["predictions"]["int8"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c.as_u64().unwrap() as usize)
            .collect();
        assert_eq!(int8.len(), 450, "{set}");
        let firmware: Vec<usize> = committed(set).lines().map(|l| parse(l).class).collect();
        assert_eq!(firmware.len(), rows.len(), "{set}");
        assert_eq!(&int8[rows], &firmware[..], "{set}");
    }
}
