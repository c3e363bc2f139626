//! `kinglet score` through the real binary on the bundled examples: its CSV and JSON equal, bit
//! for bit, what the runtime computes in this process for every row, through every input path
//! the rows allow and both entry points, for the int8 and the f32 pack; and its f32 scores equal
//! scikit-learn's `predict_proba` within 1e-5.
use kinglet_converter::dataset::{load_csv, CsvOptions, Dataset, LabelColumn};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8_sections, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use kinglet_runtime::{Activations, Input, Model, Stage};
use std::path::{Path, PathBuf};
use std::process::Command;

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

fn heldout(example: &str) -> Dataset {
    load_csv(
        &repo(&format!("examples/{example}/heldout.csv")),
        &CsvOptions {
            label: Some(LabelColumn::Name("label".into())),
            has_header: None,
        },
    )
    .unwrap()
}

/// The example's f32 and int8 packs, written into `dir`.
fn packs(example: &str, dir: &Path) -> [(PathBuf, Vec<u8>); 2] {
    let model = import_file(&repo(&format!("examples/{example}/model.onnx"))).unwrap();
    let calib = load_csv(
        &repo(&format!("examples/{example}/calibration.csv")),
        &CsvOptions::default(),
    )
    .unwrap();
    let f = pack_f32(&model).unwrap();
    let q = pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
        .unwrap()
        .blob;
    let (pf, pq) = (
        dir.join(format!("{example}.f32.kgl")),
        dir.join(format!("{example}.int8.kgl")),
    );
    std::fs::write(&pf, &f).unwrap();
    std::fs::write(&pq, &q).unwrap();
    [(pf, f), (pq, q)]
}

/// One row as the runtime gives it in this process.
#[derive(Debug, PartialEq)]
struct Expected {
    infer: usize,
    classify: usize,
    score_bits: Vec<u32>,
    /// int8 values, or f32 bit patterns, as i64.
    outputs: Vec<i64>,
}

fn in_process(m: &Model<'_>, input: Input<'_>) -> Expected {
    let mut scratch = vec![0u8; m.scratch_bytes()];
    let mut scores = vec![0f32; m.output_len()];
    let last = m.layers().count();
    let mut outputs = Vec::new();
    let p = m
        .infer_traced(input, &mut scratch, &mut scores, &mut |s: &Stage<'_>| {
            if s.index == last {
                outputs = (0..s.values.len())
                    .map(|k| match s.values {
                        Activations::Int8 { .. } => i64::from(s.values.int8(k).unwrap()),
                        Activations::Int16 { .. } => i64::from(s.values.int16(k).unwrap()),
                        Activations::F32 { .. } => i64::from(s.values.real(k).unwrap().to_bits()),
                    })
                    .collect();
            }
        })
        .unwrap();
    Expected {
        infer: p.class,
        classify: m.classify(input, &mut scratch).unwrap(),
        score_bits: scores.iter().map(|s| s.to_bits()).collect(),
        outputs,
    }
}

fn score(blob: &Path, example: &str, feed: &str, entry: &str, format: &str) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_kinglet"))
        .arg("score")
        .arg(blob)
        .arg("--data")
        .arg(repo(&format!("examples/{example}/heldout.csv")))
        .args([
            "--label", "label", "--feed", feed, "--entry", entry, "--format", format,
        ])
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8(o.stdout).unwrap()
}

/// (class, score bits, outputs) per row, from the JSON.
fn from_json(text: &str, int8: bool) -> Vec<(usize, Vec<u32>, Vec<i64>)> {
    let v: serde_json::Value = serde_json::from_str(text).unwrap();
    v["rows"]
        .as_array()
        .unwrap()
        .iter()
        .enumerate()
        .map(|(i, r)| {
            assert_eq!(r["row"].as_u64(), Some(i as u64));
            let bits = |x: &serde_json::Value| (x.as_f64().unwrap() as f32).to_bits();
            (
                r["class"].as_u64().unwrap() as usize,
                r["scores"].as_array().unwrap().iter().map(bits).collect(),
                r["outputs"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|x| {
                        if int8 {
                            x.as_i64().unwrap()
                        } else {
                            i64::from(bits(x))
                        }
                    })
                    .collect(),
            )
        })
        .collect()
}

/// The same from the CSV (parsed as f32 directly).
fn from_csv(text: &str, int8: bool, n: usize) -> Vec<(usize, Vec<u32>, Vec<i64>)> {
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    assert_eq!(&header[..4], ["row", "class", "label", "truth"]);
    assert_eq!(header.len(), 4 + 2 * n);
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            let f = |k: usize| rec[k].parse::<f32>().unwrap().to_bits();
            (
                rec[1].parse().unwrap(),
                (4..4 + n).map(f).collect(),
                (4 + n..4 + 2 * n)
                    .map(|k| {
                        if int8 {
                            rec[k].parse().unwrap()
                        } else {
                            i64::from(f(k))
                        }
                    })
                    .collect(),
            )
        })
        .collect()
}

#[test]
fn every_bundled_example_equals_the_runtime_in_process_bit_for_bit() {
    let dir = tempfile::tempdir().unwrap();
    let mut runs = 0;
    for example in ["digits", "vibration"] {
        let data = heldout(example);
        // The digits features are pixel counts 0..=16, whole numbers for both integer paths;
        // the vibration features are not, so they only go through f32.
        let integral = data.features.iter().all(|x| x.fract() == 0.0);
        assert_eq!(integral, example == "digits");
        let feeds: &[&str] = if integral {
            &["f32", "i16", "u8"]
        } else {
            &["f32"]
        };
        for (path, bytes) in packs(example, dir.path()) {
            let m = Model::parse(&bytes).unwrap();
            let int8 = m.precision() == kinglet_runtime::Precision::Int8;
            for &feed in feeds {
                let want: Vec<Expected> = (0..data.rows)
                    .map(|r| {
                        let row = data.row(r);
                        let i16s: Vec<i16> = row.iter().map(|&x| x as i16).collect();
                        let u8s: Vec<u8> = row.iter().map(|&x| x as u8).collect();
                        in_process(
                            &m,
                            match feed {
                                "f32" => Input::F32(row),
                                "i16" => Input::I16(&i16s),
                                _ => Input::U8(&u8s),
                            },
                        )
                    })
                    .collect();
                for entry in ["infer", "classify"] {
                    let json = from_json(&score(&path, example, feed, entry, "json"), int8);
                    assert_eq!(json.len(), data.rows);
                    if entry == "infer" {
                        let text = score(&path, example, feed, entry, "csv");
                        let csv = from_csv(&text, int8, m.output_len());
                        assert_eq!(json, csv, "{example} {feed}: CSV and JSON differ");
                    }
                    for (r, (got, w)) in json.iter().zip(&want).enumerate() {
                        let class = if entry == "infer" {
                            w.infer
                        } else {
                            w.classify
                        };
                        let what = format!("{example} {} {feed} {entry} row {r}", path.display());
                        assert_eq!(got.0, class, "{what}: class");
                        assert_eq!(got.1, w.score_bits, "{what}: scores");
                        assert_eq!(got.2, w.outputs, "{what}: outputs");
                    }
                    runs += 1;
                }
            }
        }
    }
    // digits: 2 packs × 3 feeds × 2 entries; vibration: 2 packs × 1 feed × 2 entries.
    assert_eq!(runs, 16);
}

/// Rows of a headered CSV of floats.
fn float_csv(rel: &str) -> Vec<Vec<f64>> {
    csv::Reader::from_path(repo(rel))
        .unwrap()
        .records()
        .map(|r| r.unwrap().iter().map(|v| v.parse().unwrap()).collect())
        .collect()
}

#[test]
fn f32_scores_equal_scikit_learn_predict_proba() {
    // Reference: examples/digits/expected_proba.csv (examples/digits/make_model.py) and
    // examples/vibration/expected_proba.csv (examples/vibration/train.py): scikit-learn's
    // `predict_proba` of each example's held-out rows, written with %.9g. The f32 pack's scores
    // must be within 1e-5 of them (the examples' own ONNX check uses the same tolerance).
    let dir = tempfile::tempdir().unwrap();
    for example in ["digits", "vibration"] {
        let [(f32_blob, _), _] = packs(example, dir.path());
        let sk = float_csv(&format!("examples/{example}/expected_proba.csv"));
        let text = score(&f32_blob, example, "f32", "infer", "csv");
        let ours = from_csv(&text, false, sk[0].len());
        assert_eq!(ours.len(), sk.len());
        let mut worst = 0f64;
        for (r, ((_, bits, _), p)) in ours.iter().zip(&sk).enumerate() {
            for (k, (&b, &q)) in bits.iter().zip(p).enumerate() {
                let d = (f64::from(f32::from_bits(b)) - q).abs();
                worst = worst.max(d);
                assert!(
                    d <= 1e-5,
                    "{example} row {r} class {k}: ours {}, scikit-learn {q}",
                    f32::from_bits(b)
                );
            }
        }
        eprintln!("{example}: largest |score − predict_proba| {worst:.3e}");
    }
}

#[test]
fn vector_lines_carry_integer_inputs_and_default_to_the_file_name() {
    let o = Command::new(env!("CARGO_BIN_EXE_kinglet"))
        .arg("score")
        .arg(repo("firmware-example/models/digits.kgl"))
        .arg("--data")
        .arg(repo("examples/digits/heldout.csv"))
        .args([
            "--label", "label", "--feed", "u8", "--rows", "448..", "--format", "vectors",
        ])
        .arg("--with-inputs")
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let text = String::from_utf8(o.stdout).unwrap();
    let data = heldout("digits");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 2);
    for (i, line) in lines.iter().enumerate() {
        assert!(
            line.starts_with(&format!("heldout {i:03} label=")),
            "{line}"
        );
        let feat = line.split(" feat=").nth(1).unwrap();
        let pixels: Vec<String> = data
            .row(448 + i)
            .iter()
            .map(|&x| (x as u8).to_string())
            .collect();
        assert_eq!(feat, pixels.join(","));
    }
}
