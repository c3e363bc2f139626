//! The bad-input catalogue (`docs/bad-inputs.md`), command-line rows: each test is one row (its
//! id in the name), run through the real `kinglet` binary in a fresh directory. Every row must
//! exit with code 2, print nothing on stdout and exactly one line `kinglet: error: <cause>` on
//! stderr naming what is wrong and where, and leave no file behind (no output blob, no
//! temporary). The runtime and library rows are in `tests/tests/bad_inputs.rs`.
use kinglet_builder::npy::npy_bytes;
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::Command;

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

fn fixture(name: &str) -> PathBuf {
    repo("tests/fixtures/bad").join(name)
}

/// A scratch directory the command runs in.
struct Case {
    dir: tempfile::TempDir,
}

impl Case {
    fn new() -> Self {
        Case {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    /// Copies `tests/fixtures/bad/<name>` into the directory.
    fn with(self, name: &str) -> Self {
        std::fs::copy(fixture(name), self.dir.path().join(name)).expect("fixture copies");
        self
    }

    /// Copies a repository file into the directory under `name`.
    fn with_repo(self, rel: &str, name: &str) -> Self {
        std::fs::copy(repo(rel), self.dir.path().join(name)).expect("repo file copies");
        self
    }

    fn put(self, name: &str, bytes: &[u8]) -> Self {
        std::fs::write(self.dir.path().join(name), bytes).expect("write");
        self
    }

    fn listing(&self) -> BTreeSet<String> {
        let mut out = BTreeSet::new();
        let mut stack = vec![self.dir.path().to_path_buf()];
        while let Some(d) = stack.pop() {
            for e in std::fs::read_dir(&d).expect("read dir").flatten() {
                let p = e.path();
                if p.is_dir() {
                    stack.push(p.clone());
                }
                out.insert(
                    p.strip_prefix(self.dir.path())
                        .unwrap()
                        .display()
                        .to_string(),
                );
            }
        }
        out
    }

    /// Every file in the directory with its bytes: "nothing written, no input touched".
    fn snapshot(&self) -> std::collections::BTreeMap<String, Option<Vec<u8>>> {
        self.listing()
            .into_iter()
            .map(|name| {
                let p = self.dir.path().join(&name);
                let bytes = if p.is_file() {
                    Some(std::fs::read(&p).expect("read"))
                } else {
                    None
                };
                (name, bytes)
            })
            .collect()
    }

    fn run(&self, args: &[&str]) -> std::process::Output {
        Command::new(env!("CARGO_BIN_EXE_kinglet"))
            .args(args)
            .current_dir(self.dir.path())
            .output()
            .expect("kinglet runs")
    }

    /// Runs `kinglet args`, checks the failure contract, and returns the cause (the text after
    /// `kinglet: error: `), which must contain every one of `wants`.
    fn fails(&self, args: &[&str], wants: &[&str]) -> String {
        let before = self.listing();
        let contents = self.snapshot();
        let out = self.run(args);
        let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
        assert_eq!(out.status.code(), Some(2), "{args:?}: stderr {stderr}");
        assert!(
            out.stdout.is_empty(),
            "{args:?}: stdout {:?}",
            String::from_utf8_lossy(&out.stdout)
        );
        assert!(!stderr.contains("panicked"), "{args:?}: {stderr}");
        let line = stderr.strip_suffix('\n').unwrap_or(&stderr);
        assert!(
            !line.contains('\n'),
            "{args:?}: more than one line: {stderr}"
        );
        let cause = line
            .strip_prefix("kinglet: error: ")
            .unwrap_or_else(|| panic!("{args:?}: not an error line: {stderr}"));
        for w in wants {
            assert!(
                cause.contains(w),
                "{args:?}: {cause:?} does not mention {w:?}"
            );
        }
        // No cause is printed twice.
        let parts: Vec<&str> = cause.split(": ").collect();
        for (i, p) in parts.iter().enumerate() {
            if p.len() > 12 {
                assert!(
                    !parts[i + 1..].contains(p),
                    "{args:?}: {p:?} repeated in {cause:?}"
                );
            }
        }
        assert_eq!(self.listing(), before, "{args:?}: files left behind");
        assert!(self.snapshot() == contents, "{args:?}: a file was changed");
        println!("{cause}");
        cause.to_string()
    }

    /// Packs the plain 2-input model to `name` (int8, calibrated on `rows.csv`).
    fn packed(self, name: &str) -> Self {
        self.packed_with(name, &[])
    }

    /// [`Case::packed`] with more `pack` options.
    fn packed_with(self, name: &str, extra: &[&str]) -> Self {
        let c = self.with("model_2in.json").with("rows.csv");
        let mut args = vec![
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "-o",
            name,
        ];
        args.extend_from_slice(extra);
        let out = c.run(&args);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        c
    }

    fn read(&self, name: &str) -> Vec<u8> {
        std::fs::read(self.dir.path().join(name)).expect("read")
    }
}

fn pack_with_rows(rows: &str, wants: &[&str]) -> String {
    Case::new().with("model_2in.json").with(rows).fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            rows,
            "-o",
            "out/m.kgl",
        ],
        wants,
    )
}

/// `pack model_2in.json --calibration rows.npy`, with `bytes` written as `rows.npy`.
fn pack_with_npy(bytes: &[u8], wants: &[&str]) -> String {
    Case::new()
        .with("model_2in.json")
        .put("rows.npy", bytes)
        .fails(
            &[
                "pack",
                "model_2in.json",
                "--calibration",
                "rows.npy",
                "-o",
                "m.kgl",
            ],
            wants,
        )
}

fn pack_float(model: &str, wants: &[&str]) -> String {
    Case::new()
        .with(model)
        .fails(&["pack", model, "--float", "-o", "m.kgl"], wants)
}

fn pack_onnx_fixture(name: &str, wants: &[&str]) -> String {
    Case::new()
        .with_repo(&format!("tests/fixtures/onnx/{name}"), name)
        .fails(&["pack", name, "--float", "-o", "m.kgl"], wants)
}

#[test]
fn baseline_pack_and_inspect_succeed() {
    let c = Case::new().packed("m.kgl");
    let out = c.run(&["inspect", "m.kgl"]);
    assert_eq!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stdout).contains("int8"));
}

#[test]
fn c01_inspect_truncated_blob() {
    let c = Case::new().packed("m.kgl");
    let b = c.read("m.kgl");
    let c = c.put("cut.kgl", &b[..b.len() - 7]);
    c.fails(
        &["inspect", "cut.kgl"],
        &[
            "cut.kgl",
            &format!(
                "blob truncated: needs {} bytes, got {}",
                b.len(),
                b.len() - 7
            ),
        ],
    );
    let c = c.put("head.kgl", &b[..12]);
    c.fails(
        &["inspect", "head.kgl"],
        &["head.kgl", "needs 20 bytes, got 12"],
    );
}

#[test]
fn c02_inspect_bit_flipped_blob() {
    let c = Case::new().packed("m.kgl");
    let mut b = c.read("m.kgl");
    let at = b.len() / 2;
    b[at] ^= 0x10;
    c.put("flip.kgl", &b)
        .fails(&["inspect", "flip.kgl"], &["flip.kgl", "checksum mismatch"]);
}

#[test]
fn c03_inspect_blob_from_a_newer_format_version() {
    let c = Case::new().packed("m.kgl");
    let mut b = c.read("m.kgl");
    let newer = kinglet_runtime::FORMAT_VERSION + 1;
    let at = kinglet_runtime::unstable::wire::header::offset::VERSION;
    b[at..at + 2].copy_from_slice(&newer.to_le_bytes());
    kinglet_builder::reseal(&mut b).unwrap();
    c.put("newer.kgl", &b).fails(
        &["inspect", "newer.kgl"],
        &[
            "newer.kgl",
            &format!("model format version {newer} is not supported"),
            &format!("accepts versions 1 to {}", kinglet_runtime::FORMAT_VERSION),
        ],
    );
}

#[test]
fn c04_inspect_wrong_magic() {
    Case::new()
        .with_repo("examples/vibration/model.onnx", "model.onnx")
        .fails(
            &["inspect", "model.onnx"],
            &["model.onnx", "not a Kinglet model: wrong magic bytes"],
        );
}

#[test]
fn c05_inspect_empty_file() {
    Case::new().put("empty.kgl", b"").fails(
        &["inspect", "empty.kgl"],
        &["empty.kgl", "needs 20 bytes, got 0"],
    );
}

#[test]
fn c06_inspect_missing_file() {
    Case::new().fails(&["inspect", "nowhere.kgl"], &["cannot read nowhere.kgl"]);
}

#[test]
fn c07_ragged_csv() {
    pack_with_rows(
        "ragged.csv",
        &["ragged.csv", "line 3", "1 fields, but the first row has 2"],
    );
}

#[test]
fn c08_nan_in_calibration_rows() {
    pack_with_rows("nan.csv", &["nan.csv", "line 3, column 'b'", "finite f32"]);
}

#[test]
fn c09_inf_in_calibration_rows() {
    pack_with_rows("inf.csv", &["inf.csv", "line 4, column 'a'", "finite f32"]);
}

#[test]
fn c10_calibration_value_beyond_f32() {
    pack_with_rows(
        "f32_overflow.csv",
        &["f32_overflow.csv", "line 3, column 'a'", "1e39"],
    );
}

#[test]
fn c11_calibration_field_not_a_number() {
    pack_with_rows(
        "text_field.csv",
        &[
            "text_field.csv",
            "line 3, column 'b'",
            "\"four\" is not a number",
        ],
    );
}

#[test]
fn c12_calibration_rows_of_the_wrong_width() {
    pack_with_rows(
        "wide.csv",
        &[
            "wide.csv",
            "3 features per row, but the model takes 2 inputs",
        ],
    );
}

#[test]
fn c13_calibration_with_no_rows() {
    pack_with_rows(
        "header_only.csv",
        &["header_only.csv", "header but no data rows"],
    );
}

#[test]
fn c14_empty_calibration_file() {
    pack_with_rows("empty.csv", &["empty.csv", "the file is empty"]);
}

#[test]
fn c15_label_column_out_of_range() {
    Case::new().with("model_2in.json").with("rows.csv").fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--calibration-label",
            "5",
            "-o",
            "m.kgl",
        ],
        &[
            "rows.csv",
            "label column index 5 is out of range",
            "2 columns",
        ],
    );
}

#[test]
fn c16_label_column_name_not_found() {
    Case::new().with("model_2in.json").with("rows.csv").fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--calibration-label",
            "species",
            "-o",
            "m.kgl",
        ],
        &["rows.csv", "no column named \"species\"", "\"a\", \"b\""],
    );
}

#[test]
fn c17_calibration_csv_not_utf8() {
    pack_with_rows("not_utf8.csv", &["not_utf8.csv", "line 2", "invalid UTF-8"]);
}

#[test]
fn c18_truncated_npy_calibration() {
    let full = npy_bytes(&[3, 2], &[0f32; 6]);
    pack_with_npy(&full[..full.len() - 5], &["rows.npy"]);
}

#[test]
fn c19_nan_in_npy_calibration() {
    pack_with_npy(
        &npy_bytes(&[2, 2], &[1.0f32, 2.0, f32::NAN, 4.0]),
        &["rows.npy", "row index 1, column index 0: NaN"],
    );
}

#[test]
fn c20_unsupported_onnx_op() {
    pack_onnx_fixture(
        "bad_thresholded_relu.onnx",
        &[
            "bad_thresholded_relu.onnx",
            "node 'thresholded1'",
            "op ThresholdedRelu is not supported",
            "supported: MatMul",
        ],
    );
    pack_onnx_fixture(
        "bad_conv.onnx",
        &["node 'conv1'", "op Conv is not supported"],
    );
}

#[test]
fn c21_onnx_graph_with_two_inputs() {
    pack_onnx_fixture(
        "bad_two_inputs.onnx",
        &[
            "the graph has 2 data inputs ('x', 'x2')",
            "exactly one graph input",
        ],
    );
}

#[test]
fn c22_cyclic_onnx_graph() {
    pack_onnx_fixture(
        "bad_cycle.onnx",
        &["the graph has a cycle through node 'add_loop'"],
    );
}

#[test]
fn c23_disconnected_onnx_graph() {
    pack_onnx_fixture(
        "bad_disconnected.onnx",
        &["node 'stray_relu'", "not connected to the model"],
    );
}

#[test]
fn c24_empty_onnx_graph() {
    pack_onnx_fixture("bad_empty_graph.onnx", &["the ONNX graph has no nodes"]);
}

#[test]
fn c25_nan_weight_in_onnx() {
    pack_onnx_fixture(
        "bad_nan_weight.onnx",
        &[
            "node 'fc_nan'",
            "tensor 'Wnan' has a non-finite value (NaN) at flat index 7",
        ],
    );
}

#[test]
fn c26_truncated_onnx() {
    pack_onnx_fixture(
        "bad_truncated.onnx",
        &["bad_truncated.onnx", "not a valid ONNX model"],
    );
}

#[test]
fn c27_onnx_layer_widths_do_not_chain() {
    pack_onnx_fixture(
        "bad_shape_mismatch.onnx",
        &[
            "node 'fc2'",
            "take 5 inputs but the previous dense layer has 4 outputs",
        ],
    );
}

#[test]
fn c28_onnx_sigmoid_on_several_outputs() {
    pack_onnx_fixture(
        "bad_sigmoid_multi.onnx",
        &["node 'sigmoid_multi'", "Sigmoid on 4 outputs"],
    );
}

#[test]
fn c29_plain_model_widths_do_not_chain() {
    pack_float("plain_widths.json", &["plain_widths.json", "layers[1]"]);
}

#[test]
fn c30_plain_model_without_layers() {
    pack_float("plain_empty.json", &["plain_empty.json", "layer"]);
}

#[test]
fn c31_plain_model_of_a_newer_version() {
    pack_float("plain_v2.json", &["plain_v2.json", "2"]);
}

#[test]
fn c32_plain_model_unknown_activation() {
    pack_float(
        "plain_tanh.json",
        &[
            "plain_tanh.json",
            "layers[0].activation",
            "unknown variant `tanh`",
            "line 1 column",
        ],
    );
}

#[test]
fn c33_plain_weight_beyond_f32() {
    pack_float(
        "plain_f32_overflow.json",
        &[
            "plain_f32_overflow.json",
            "layers[0].weights",
            "at output 1, input 1 is not a finite f32",
        ],
    );
}

#[test]
fn c34_plain_model_nan_is_not_json() {
    pack_float(
        "plain_nan_token.json",
        &["plain_nan_token.json", "line 1 column"],
    );
}

#[test]
fn c35_plain_model_names_a_missing_npy() {
    let cause = pack_float(
        "plain_missing_npy.json",
        &[
            "plain_missing_npy.json",
            "layers[0].weights",
            "kernel.npy",
            "cannot read the file",
        ],
    );
    // Regression: the OS error used to be printed three times on this line.
    assert_eq!(cause.matches("os error 2").count(), 1, "{cause}");
}

#[test]
fn c36_plain_model_with_more_layers_than_the_format_holds() {
    let layer = r#"{"inputs": 2, "outputs": 2, "activation": "relu", "weights": [[1, 0], [0, 1]], "bias": [0, 0]}"#;
    let json = format!(
        r#"{{"kinglet_model": 1, "input_width": 2, "layers": [{}], "output": "softmax"}}"#,
        [layer; 9].join(", ")
    );
    Case::new().put("nine.json", json.as_bytes()).fails(
        &["pack", "nine.json", "--float", "-o", "m.kgl"],
        &["cannot pack nine.json", "9 dense layers", "at most 8"],
    );
}

#[test]
fn c37_zero_variance_scaler() {
    Case::new()
        .with("model_2in.json")
        .with("scaler_zero_std.json")
        .fails(
            &[
                "pack",
                "model_2in.json",
                "--float",
                "--scaler",
                "scaler_zero_std.json",
                "-o",
                "m.kgl",
            ],
            &["scaler_zero_std.json", "feature 1 (0-based) has std 0"],
        );
}

#[test]
fn c38_scaler_value_beyond_f32() {
    Case::new()
        .with("model_2in.json")
        .with("scaler_overflow.json")
        .fails(
            &[
                "pack",
                "model_2in.json",
                "--float",
                "--scaler",
                "scaler_overflow.json",
                "-o",
                "m.kgl",
            ],
            &["scaler_overflow.json", "feature 1", "not a finite f32"],
        );
}

#[test]
fn c39_scaler_width_does_not_match_the_model() {
    Case::new()
        .with("model_2in.json")
        .with("scaler_width3.json")
        .fails(
            &[
                "pack",
                "model_2in.json",
                "--float",
                "--scaler",
                "scaler_width3.json",
                "-o",
                "m.kgl",
            ],
            &[
                "--scaler scaler_width3.json",
                "3 values per list",
                "takes 2 inputs",
            ],
        );
}

#[test]
fn c40_second_scaler_for_a_model_that_has_one() {
    Case::new()
        .with_repo("examples/vibration/model.onnx", "vib.onnx")
        .fails(
            &[
                "pack",
                "vib.onnx",
                "--float",
                "--divide-by",
                "255",
                "-o",
                "m.kgl",
            ],
            &["already has an input scaler"],
        );
}

#[test]
fn c41_label_count_differs_from_classes() {
    Case::new().with("model_2in.json").fails(
        &[
            "pack",
            "model_2in.json",
            "--float",
            "--labels",
            "a,b,c",
            "-o",
            "m.kgl",
        ],
        &["--labels gives 3 labels for a model with 2 classes"],
    );
}

#[test]
fn c42_zero_divisor() {
    Case::new().with("model_2in.json").fails(
        &[
            "pack",
            "model_2in.json",
            "--float",
            "--divide-by",
            "0",
            "-o",
            "m.kgl",
        ],
        &["divisor 0 must be a positive finite number"],
    );
}

#[test]
fn c43_percentile_out_of_range() {
    Case::new().with("model_2in.json").with("rows.csv").fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--range",
            "percentile",
            "--percentile",
            "30",
            "-o",
            "m.kgl",
        ],
        &["percentile must be in (50, 100], got 30"],
    );
}

#[test]
fn c44_int8_pack_without_calibration() {
    Case::new().with("model_2in.json").fails(
        &["pack", "model_2in.json", "-o", "m.kgl"],
        &["needs --calibration", "--float"],
    );
}

#[test]
fn c45_output_directory_missing() {
    Case::new().with("model_2in.json").fails(
        &[
            "pack",
            "model_2in.json",
            "--float",
            "-o",
            "no/such/dir/m.kgl",
        ],
        &[
            "cannot write no/such/dir/m.kgl",
            "directory no/such/dir does not exist",
        ],
    );
}

#[test]
fn c46_output_path_under_a_file() {
    Case::new().with("model_2in.json").with("rows.csv").fails(
        &["pack", "model_2in.json", "--float", "-o", "rows.csv/m.kgl"],
        &["cannot write rows.csv/m.kgl", "rows.csv is not a directory"],
    );
}

#[test]
fn c47_unknown_model_type() {
    Case::new().with("rows.csv").fails(
        &["pack", "rows.csv", "--float", "-o", "m.kgl"],
        &["rows.csv", "unknown model type", ".onnx", ".json"],
    );
}

#[test]
fn c48_bias_too_large_for_its_weights() {
    // Regression: this used to panic in the quantiser (i64 overflow), then was refused; now the
    // row's weight scale is widened until its bias fits the accumulator (row R31).
    let c = Case::new()
        .with("plain_bias_overflow.json")
        .with("rows.csv");
    let out = c.run(&[
        "pack",
        "plain_bias_overflow.json",
        "--calibration",
        "rows.csv",
        "-o",
        "m.kgl",
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(!c.read("m.kgl").is_empty());
}

#[test]
fn c49_failed_pack_keeps_an_existing_output() {
    // A failing pack over an existing blob leaves the old blob as it was.
    let c = Case::new().packed("m.kgl").with("nan.csv");
    let before = c.read("m.kgl");
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "nan.csv",
            "-o",
            "m.kgl",
        ],
        &["nan.csv"],
    );
    assert_eq!(c.read("m.kgl"), before);
}

#[test]
fn c50_vet_labels_out_of_range() {
    // `kinglet vet` (its own bad inputs are in cli_vet.rs): a label the 2-class model does not
    // have, on data row 2.
    let c = Case::new().packed("m.kgl").with("labels_out_of_range.csv");
    let out = c.run(&["pack", "model_2in.json", "--float", "-o", "m.f32.kgl"]);
    assert_eq!(out.status.code(), Some(0));
    c.fails(
        &[
            "vet",
            "m.f32.kgl",
            "m.kgl",
            "--data",
            "labels_out_of_range.csv",
            "--label",
            "label",
        ],
        &["labels_out_of_range.csv", "data row 2", "\"5\""],
    );
}

#[test]
fn c51_npy_header_longer_than_the_file() {
    // Regression (found by fuzzing `dataset_load`): a 55-byte `.npy` whose format-3.0 preamble
    // declares a 3.6 GB header made the reader allocate that much before reading it.
    let mut b = b"\x93NUMPY\x03\x00".to_vec();
    b.extend_from_slice(&0xD884_FF8Au32.to_le_bytes());
    b.extend_from_slice(b"{'descr': '<f4', 'fortran_order': False, }\n");
    pack_with_npy(
        &b,
        &[
            "rows.npy",
            "the header is declared as 3632594826 bytes but only",
        ],
    );
}

#[test]
fn c52_npy_header_nested_too_deep() {
    // Regression (found by fuzzing `dataset_load`): the `.npy` header parser slowed down steeply
    // with bracket nesting; a 118-byte header nesting 37 deep took 14 s.
    let text = format!("{{'descr': {}'<f4'{}, }}\n", "[".repeat(40), "]".repeat(40));
    let mut b = b"\x93NUMPY\x01\x00".to_vec();
    b.extend_from_slice(&(text.len() as u16).to_le_bytes());
    b.extend_from_slice(text.as_bytes());
    let start = std::time::Instant::now();
    pack_with_npy(
        &b,
        &[
            "rows.npy",
            "the header nests brackets 41 deep; at most 8 are accepted",
        ],
    );
    assert!(start.elapsed().as_secs() < 5, "took {:?}", start.elapsed());
}

#[test]
fn c53_npy_header_over_the_size_limit() {
    // numpy's reader refuses headers over 10,000 bytes by default; so does this one.
    let mut text = "{'descr': '<f4', 'fortran_order': False, 'shape': (1, 1), }".to_string();
    text.push_str(&" ".repeat(20_000));
    text.push('\n');
    let mut b = b"\x93NUMPY\x02\x00".to_vec();
    b.extend_from_slice(&(text.len() as u32).to_le_bytes());
    b.extend_from_slice(text.as_bytes());
    b.extend_from_slice(&[0; 4]);
    pack_with_npy(
        &b,
        &[
            "rows.npy",
            "the header is 20060 bytes; at most 10000 are accepted",
        ],
    );
}

// ---- An output never replaces an input (C54–C59) ----

#[test]
fn c54_pack_output_is_the_model() {
    // Was: the model became a blob, exit 0.
    Case::new().with("model_2in.json").fails(
        &["pack", "model_2in.json", "--float", "-o", "model_2in.json"],
        &[
            "the output (-o) model_2in.json is the same file as the model model_2in.json",
            "give another output path",
        ],
    );
}

#[test]
fn c55_pack_output_is_the_calibration_file_spelled_otherwise() {
    Case::new().with("model_2in.json").with("rows.csv").fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "-o",
            "./rows.csv",
        ],
        &["./rows.csv is the same file as --calibration rows.csv"],
    );
}

#[cfg(unix)]
#[test]
fn c56_pack_output_is_a_symlink_or_hard_link_to_the_model() {
    let c = Case::new().with("model_2in.json");
    std::os::unix::fs::symlink("model_2in.json", c.dir.path().join("link.kgl")).unwrap();
    std::fs::hard_link(
        c.dir.path().join("model_2in.json"),
        c.dir.path().join("hard.kgl"),
    )
    .unwrap();
    for out in ["link.kgl", "hard.kgl"] {
        c.fails(
            &["pack", "model_2in.json", "--float", "-o", out],
            &[&format!("{out} is the same file as the model")],
        );
    }
}

#[test]
fn c57_pack_output_is_a_weight_file_of_a_plain_model() {
    // The first layer's weights come from w.npy (3 × 2, out_in); -o w.npy would replace them.
    let weights = [1f32, 2., 3., 4., -5., 6.];
    let model = r#"{"kinglet_model": 1, "input_width": 2,
 "layers": [
  {"inputs": 2, "outputs": 3, "activation": "relu", "weights": {"layout": "out_in", "npy": "w.npy"}, "bias": [0.5, 0, 1]},
  {"inputs": 3, "outputs": 2, "activation": "linear", "weights": [[1, 0, -1], [0.5, 0.5, 0.5]], "bias": [0, 1]}
 ],
 "output": "softmax"}"#;
    let c = Case::new()
        .put("npy_model.json", model.as_bytes())
        .put("w.npy", &npy_bytes(&[3, 2], &weights));
    // The description is valid: it packs to another name.
    let ok = c.run(&["pack", "npy_model.json", "--float", "-o", "fine.kgl"]);
    assert_eq!(ok.status.code(), Some(0), "{ok:?}");
    c.fails(
        &["pack", "npy_model.json", "--float", "-o", "w.npy"],
        &["w.npy is the same file as a weight file of the model"],
    );
}

#[test]
fn c58_emit_rust_output_is_the_blob() {
    let c = Case::new().packed("v.kgl");
    c.fails(
        &["emit-rust", "v.kgl", "-o", "./v.kgl"],
        &["the output (-o) ./v.kgl is the same file as the blob v.kgl"],
    );
}

#[test]
fn c59_vet_html_is_an_input() {
    let c = Case::new().packed("v.kgl").with("rows.csv");
    for (html, input) in [
        ("v.kgl", "the int8 blob v.kgl"),
        ("rows.csv", "--data rows.csv"),
        ("model_2in.json", "the float model model_2in.json"),
    ] {
        c.fails(
            &[
                "vet",
                "model_2in.json",
                "v.kgl",
                "--data",
                "rows.csv",
                "--html",
                html,
            ],
            &[&format!("--html {html} is the same file as {input}")],
        );
    }
}

// ---- budget: no wrapped sums (C60–C61) ----

#[test]
fn c60_budget_size_options_are_bounded() {
    let c = Case::new().packed("v.kgl");
    for stack in ["18446744073709551615", "18446744073709551016", "4294967297"] {
        c.fails(
            &["budget", "v.kgl", "--board", "m4f-64k", "--stack", stack],
            &["--stack", "is not in 0..=4294967296"],
        );
    }
    c.fails(
        &["budget", "v.kgl", "--flash", "4194305K", "--ram", "8K"],
        &["--flash", "larger than 4294967296 bytes"],
    );
}

#[test]
fn c61_budget_at_the_bound_is_an_honest_no() {
    // Was: --stack u64::MAX wrapped the RAM sum to 598 bytes and said "fits".
    let c = Case::new().packed("v.kgl");
    let out = c.run(&[
        "budget",
        "v.kgl",
        "--board",
        "m0-16k",
        "--stack",
        "4294967296",
        "--json",
    ]);
    assert_eq!(out.status.code(), Some(1), "{out:?}");
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["fits"], false);
    let used = j["ram"]["used"].as_u64().unwrap();
    assert!(used > 4294967296, "{j}");
    assert_eq!(j["ram"]["headroom"].as_i64().unwrap(), 16384 - used as i64);
    let text = c.run(&[
        "budget",
        "v.kgl",
        "--board",
        "m0-16k",
        "--stack",
        "4294967296",
    ]);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(
        text.contains(&format!("({} bytes over)", used - 16384)),
        "{text}"
    );
}

// ---- Messages (C62–C67) ----

#[test]
fn c62_huge_csv_field_is_cut_in_the_message() {
    let field = "7".repeat(1_000_000);
    let rows = format!("a,b\n1,2\n{field},4\n");
    let c = Case::new()
        .with("model_2in.json")
        .put("huge.csv", rows.as_bytes());
    let cause = c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "huge.csv",
            "-o",
            "m.kgl",
        ],
        &["huge.csv: line 3, column 'a'", "(1000000 characters)"],
    );
    assert!(cause.len() < 200, "{} bytes", cause.len());
}

#[test]
fn c63_huge_float64_is_printed_short() {
    let payload = [1f64, 2., 1e300, 4.];
    let cause = pack_with_npy(
        &npy_bytes(&[2, 2], &payload),
        &["rows.npy: row index 1, column index 0: 1e300"],
    );
    assert!(cause.len() < 200, "{cause}");
}

#[test]
fn c64_vet_checks_widths_before_labels() {
    // Rows of another model (3 features, label "7"): the width is the first thing wrong.
    let c = Case::new()
        .packed("v.kgl")
        .put("other.csv", b"f0,f1,f2,label\n1,2,3,7\n4,5,6,7\n");
    c.fails(
        &[
            "vet",
            "model_2in.json",
            "v.kgl",
            "--data",
            "other.csv",
            "--label",
            "label",
        ],
        &["other.csv: 3 features per row, but the model takes 2 inputs"],
    );
}

#[test]
fn c65_calibration_label_with_npy_is_refused() {
    let payload = [1f32, 2., 3., 4.];
    let c = Case::new()
        .with("model_2in.json")
        .put("rows.npy", &npy_bytes(&[2, 2], &payload));
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.npy",
            "--calibration-label",
            "0",
            "-o",
            "m.kgl",
        ],
        &[
            "--calibration-label: rows.npy is a .npy file of features only",
            "a label column applies to CSV files",
        ],
    );
}

#[test]
fn c66_empty_label_is_refused() {
    for labels in ["a,", ",b", "a, "] {
        Case::new().with("model_2in.json").fails(
            &[
                "pack",
                "model_2in.json",
                "--float",
                "--labels",
                labels,
                "-o",
                "m.kgl",
            ],
            &["--labels: label", "is empty"],
        );
    }
}

#[test]
fn c67_usage_errors_are_one_line_for_every_subcommand() {
    let c = Case::new().packed("v.kgl");
    for args in [
        &["pack", "model_2in.json", "--flot"][..],
        &["pack"],
        &["pack", "model_2in.json", "--range", "median"],
        &["inspect"],
        &["inspect", "v.kgl", "--color"],
        &["vet", "model_2in.json", "v.kgl"],
        &[
            "vet",
            "model_2in.json",
            "v.kgl",
            "--data",
            "rows.csv",
            "--show",
            "-1",
        ],
        &["budget", "v.kgl"],
        &["budget", "v.kgl", "--board", "m0-16k", "--stack", "lots"],
        &["emit-rust", "v.kgl"],
        &["frobnicate"],
    ] {
        c.fails(args, &["(see --help)"]);
    }
    // --help and --version stay as clap prints them, on stdout, exit 0.
    for args in [&["--help"][..], &["pack", "--help"], &["--version"]] {
        let out = c.run(args);
        assert_eq!(out.status.code(), Some(0), "{args:?}");
        assert!(out.stderr.is_empty() && !out.stdout.is_empty(), "{args:?}");
    }
}

// ---- A killed write (C68) ----

#[cfg(target_os = "linux")]
#[test]
fn c68_temporary_of_a_killed_write_is_removed_by_the_next_run() {
    // `ulimit -f 1` lets a process write 1 KiB (bash) or 512 B (dash); emit-rust writes more,
    // so the kernel kills it with SIGXFSZ mid-write and its temporary stays behind.
    let c = Case::new().packed("v.kgl");
    let exe = env!("CARGO_BIN_EXE_kinglet");
    let killed = Command::new("sh")
        .arg("-c")
        .arg(format!(
            "ulimit -f 1; exec '{exe}' emit-rust v.kgl -o model.rs"
        ))
        .current_dir(c.dir.path())
        .output()
        .unwrap();
    assert_ne!(killed.status.code(), Some(0), "{killed:?}");
    let temps = |c: &Case| {
        c.listing()
            .into_iter()
            .filter(|n| n.starts_with(".model.rs.kinglet-") && n.ends_with(".tmp"))
            .count()
    };
    assert_eq!(
        temps(&c),
        1,
        "the killed write left its temporary: {:?}",
        c.listing()
    );
    assert!(!c.dir.path().join("model.rs").exists());
    let ok = c.run(&["emit-rust", "v.kgl", "-o", "model.rs"]);
    assert_eq!(ok.status.code(), Some(0), "{ok:?}");
    assert_eq!(temps(&c), 0, "the next run removed it: {:?}", c.listing());
    assert!(c.dir.path().join("model.rs").exists());
}

// ---- Calibration ranges (C69–C72) ----
/// The header and the first `n` rows of the vibration example's calibration set, then `extra`
/// rows (15 comma-separated fields each).
fn vibration_rows(n: usize, extra: &[String]) -> String {
    let text = std::fs::read_to_string(repo("examples/vibration/calibration.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().take(n + 1).map(str::to_string).collect();
    lines.extend(extra.iter().cloned());
    lines.join("\n") + "\n"
}

/// One row of 15 equal fields.
fn row_of(v: &str) -> String {
    vec![v; 15].join(",")
}

/// `kinglet pack vib.onnx --calibration <name> <extra...> -o m.kgl` with `bytes` as `<name>`.
fn pack_vibration(name: &str, bytes: &[u8], extra: &[&str], wants: &[&str]) -> String {
    let mut args = vec!["pack", "vib.onnx", "--calibration", name];
    args.extend_from_slice(extra);
    args.extend_from_slice(&["-o", "m.kgl"]);
    Case::new()
        .with_repo("examples/vibration/model.onnx", "vib.onnx")
        .put(name, bytes)
        .fails(&args, wants)
}

#[test]
fn c69_one_calibration_row_of_3e38() {
    // Regression: fifty ordinary rows and one row of 3e38 made the input scale 7.6e34, pack
    // exited 0, and the int8 model scored 25 % (chance) against 98.7 % for the float model.
    // 51 rows of 15 features: 765 input values, the 15 of row 51 far; the percentile that
    // leaves them out is ⌊100 · (765 - 1 - 15) / (765 - 1)⌋ to two decimals = 98.03.
    let csv = vibration_rows(50, &[row_of("3e38")]);
    let wants = [
        "cannot pack vib.onnx",
        "cal.csv: row 51 (1-based, header not counted) is beyond anything the model could have been trained on",
        "its first-layer input terms (|w·x| ≥ ",
        "drown every bias (|b| ≤ ",
        ") below one f32 step",
        "use --range percentile --percentile 98.03 to clip it, or drop the row",
    ];
    pack_vibration("cal.csv", csv.as_bytes(), &[], &wants);
    // The default percentile (99.99) does not clip 15 values of 765 either; the option named
    // is then the percentile alone.
    pack_vibration(
        "cal.csv",
        csv.as_bytes(),
        &["--range", "percentile"],
        &["cal.csv: row 51", "use --percentile 98.03 to clip it"],
    );
}

#[test]
fn c70_npy_calibration_with_a_row_of_huge_integers() {
    // The same through a `.npy` of int64: fifty ordinary rows (the vibration calibration rows,
    // rounded) and one row of i64::MAX (9.2e18 as f32).
    let text = vibration_rows(50, &[]);
    let mut payload = Vec::new();
    for line in text.lines().skip(1) {
        for f in line.split(',') {
            let v: f64 = f.parse().unwrap();
            payload.push(v.round() as i64);
        }
    }
    for _ in 0..15 {
        payload.push(i64::MAX);
    }
    pack_vibration(
        "rows.npy",
        &npy_bytes(&[51, 15], &payload),
        &[],
        &[
            "rows.npy: row index 50 is beyond anything the model could have been trained on",
            "use --range percentile --percentile 98.03 to clip it",
        ],
    );
}

#[test]
fn c71_calibration_rows_in_the_wrong_units() {
    // Every row 1e9 times too large (features in the wrong units): no percentile helps.
    let text = vibration_rows(50, &[]);
    let mut lines = text.lines();
    let mut csv = format!("{}\n", lines.next().unwrap());
    for line in lines {
        let scaled: Vec<String> = line
            .split(',')
            .map(|f| format!("{:e}", f.parse::<f64>().unwrap() * 1e9))
            .collect();
        csv.push_str(&scaled.join(","));
        csv.push('\n');
    }
    pack_vibration(
        "cal.csv",
        csv.as_bytes(),
        &[],
        &[
            "cal.csv: rows 1 and 49 more (1-based, header not counted) are beyond anything",
            "their first-layer input terms",
            "check that the file holds raw features in the model's units",
        ],
    );
}

#[test]
fn c72_calibrated_range_too_wide_for_int8() {
    // Regression: this packed (exit 0). A first layer without biases is not judged by them,
    // but a range of [-3e38, 3e38] has int8 steps of 2.4e36 and a width, 255 steps, beyond
    // f32 (the reader accepts it: it needs only the 128 steps from the zero point finite).
    let model = r#"{"kinglet_model": 1, "input_width": 2, "layers": [{"inputs": 2, "outputs": 2, "activation": "linear", "weights": [[1, 0], [0, 1]], "bias": [0, 0]}], "output": "softmax"}"#;
    Case::new()
        .put("nobias.json", model.as_bytes())
        .put("wide.csv", b"a,b\n1,2\n3e38,-3e38\n-3e38,3e38\n")
        .fails(
            &[
                "pack",
                "nobias.json",
                "--calibration",
                "wide.csv",
                "-o",
                "m.kgl",
            ],
            &[
                "cannot pack nobias.json",
                "input: the calibrated range [-3.00e38, 3.00e38] is too wide for int8",
                "its width (255 steps of 2.35e36) overflows f32",
            ],
        );
}

// ---- Integer input paths and `kinglet score` (C80–C89) ----

#[test]
fn c80_fractional_value_on_an_integer_path() {
    let c = Case::new()
        .packed("v.kgl")
        .put("px.csv", b"a,b\n1,2\n3,2.5\n");
    for cmd in [
        &[
            "score", "v.kgl", "--data", "px.csv", "--feed", "u8", "-o", "s.csv",
        ][..],
        &[
            "vet",
            "model_2in.json",
            "v.kgl",
            "--data",
            "px.csv",
            "--feed",
            "u8",
            "--html",
            "r.html",
        ],
    ] {
        c.fails(
            cmd,
            &["px.csv: line 3, column 'b': 2.5 is not a whole number (the u8 input path takes whole numbers from 0 to 255)"],
        );
    }
    // Judged by its digits: 1.0000000000000000001 parses to exactly 1.0, but is not whole.
    let c = c.put("near.csv", b"a,b\n1.0000000000000000001,2\n");
    c.fails(
        &["score", "v.kgl", "--data", "near.csv", "--feed", "i16"],
        &["near.csv: line 2, column 'a': 1.0000000000000000001 is not a whole number (the i16 input path takes whole numbers from -32768 to 32767)"],
    );
}

#[test]
fn c81_integer_out_of_the_types_range() {
    let c = Case::new()
        .packed("v.kgl")
        .put("px.csv", b"a,b\n1,256\n")
        .put("neg.csv", b"1,-1\n");
    c.fails(
        &[
            "score", "v.kgl", "--data", "px.csv", "--feed", "u8", "-o", "s.csv",
        ],
        &["px.csv: line 2, column 'b': 256 is out of range for the u8 input path (0 to 255)"],
    );
    c.fails(
        &[
            "vet",
            "model_2in.json",
            "v.kgl",
            "--data",
            "neg.csv",
            "--feed",
            "u8",
            "--html",
            "r.html",
        ],
        &["neg.csv: line 1, column index 1: -1 is out of range for the u8 input path (0 to 255)"],
    );
    let c = c.put("big.csv", b"a,b\n40000,0\n");
    c.fails(
        &["score", "v.kgl", "--data", "big.csv", "--feed", "i16"],
        &["big.csv: line 2, column 'a': 40000 is out of range for the i16 input path (-32768 to 32767)"],
    );
}

#[test]
fn c82_npy_values_for_an_integer_path() {
    let f64s = [1f64, 2., 1e300, 0.];
    let half = [1f32, 0.5];
    let i16s = [3i16, -1];
    let c = Case::new()
        .packed("v.kgl")
        .put("huge.npy", &npy_bytes(&[2, 2], &f64s))
        .put("half.npy", &npy_bytes(&[1, 2], &half))
        .put("neg.npy", &npy_bytes(&[1, 2], &i16s));
    c.fails(
        &["score", "v.kgl", "--data", "huge.npy", "--feed", "i16", "-o", "s.csv"],
        &["huge.npy: row index 1, column index 0: 1e300 is out of range for the i16 input path (-32768 to 32767)"],
    );
    c.fails(
        &["score", "v.kgl", "--data", "half.npy", "--feed", "u8"],
        &["half.npy: row index 0, column index 1: 0.5 is not a whole number"],
    );
    c.fails(
        &["vet", "model_2in.json", "v.kgl", "--data", "neg.npy", "--feed", "u8"],
        &["neg.npy: row index 0, column index 1: -1 is out of range for the u8 input path (0 to 255)"],
    );
}

#[test]
fn c83_score_output_is_an_input() {
    let c = Case::new().packed("v.kgl");
    c.fails(
        &["score", "v.kgl", "--data", "rows.csv", "-o", "./rows.csv"],
        &["the output (-o) ./rows.csv is the same file as --data rows.csv; writing it would destroy that input"],
    );
    c.fails(
        &["score", "v.kgl", "--data", "rows.csv", "-o", "v.kgl"],
        &["the output (-o) v.kgl is the same file as the blob v.kgl"],
    );
    let payload = [1f32, 2.];
    let c = c
        .put("x.npy", &npy_bytes(&[1, 2], &payload))
        .put("y.npy", &npy_bytes(&[1], &[0i64]));
    c.fails(
        &[
            "score",
            "v.kgl",
            "--data",
            "x.npy",
            "--label-file",
            "y.npy",
            "-o",
            "y.npy",
        ],
        &["the output (-o) y.npy is the same file as --label-file y.npy"],
    );
}

#[test]
fn c84_row_ranges_that_select_nothing_or_too_much() {
    let c = Case::new().packed("v.kgl");
    let score = |range: &str, wants: &[&str]| {
        c.fails(
            &[
                "score", "v.kgl", "--data", "rows.csv", "--rows", range, "-o", "s.csv",
            ],
            wants,
        )
    };
    score(
        "2..1",
        &["--rows: the row range 2..1 selects no rows (the end is excluded and must be after the start)"],
    );
    score("1..1", &["the row range 1..1 selects no rows"]);
    score(
        "0..5",
        &["--rows: the row range 0..5 goes past the end: rows.csv has 3 data rows (0 to 2)"],
    );
    score("3..", &["the row range 3..3 selects no rows"]);
    for bad in ["x", "1-2", "1..2..3", "1.5..3"] {
        score(
            bad,
            &[
                "invalid value",
                "for '--rows <START..END>': expected START..END or START..",
                "(see --help)",
            ],
        );
    }
    c.fails(
        &["score", "v.kgl", "--data", "rows.csv", "--rows=-1..2"],
        &[
            "invalid value '-1..2' for '--rows <START..END>'",
            "(see --help)",
        ],
    );
}

#[test]
fn c85_vector_options_need_the_vectors_format_and_a_one_word_name() {
    let c = Case::new()
        .packed("v.kgl")
        .with_repo("tests/fixtures/bad/rows.csv", "my rows.csv");
    c.fails(
        &["score", "v.kgl", "--data", "rows.csv", "--name", "set1"],
        &["--name applies to --format vectors"],
    );
    c.fails(
        &[
            "score",
            "v.kgl",
            "--data",
            "rows.csv",
            "--format",
            "json",
            "--with-inputs",
        ],
        &["--with-inputs applies to --format vectors"],
    );
    c.fails(
        &["score", "v.kgl", "--data", "rows.csv", "--format", "vectors", "--name", "two words", "-o", "v.txt"],
        &["--name: the vector set name \"two words\" contains ' '; a name is the first word of each line"],
    );
    c.fails(
        &[
            "score", "v.kgl", "--data", "rows.csv", "--format", "vectors", "--name", "",
        ],
        &["--name: the vector set name is empty"],
    );
    c.fails(
        &["score", "v.kgl", "--data", "my rows.csv", "--format", "vectors", "-o", "v.txt"],
        &["my rows.csv: give the set a name with --name: the vector set name \"my rows\" contains ' '"],
    );
}

#[test]
fn c86_unknown_feed_entry_or_format_is_a_usage_error() {
    let c = Case::new().packed("v.kgl");
    for args in [
        &["score", "v.kgl", "--data", "rows.csv", "--feed", "i8"][..],
        &["score", "v.kgl", "--data", "rows.csv", "--entry", "predict"],
        &["score", "v.kgl", "--data", "rows.csv", "--format", "xml"],
        &["score", "v.kgl"],
        &[
            "vet",
            "model_2in.json",
            "v.kgl",
            "--data",
            "rows.csv",
            "--feed",
            "f16",
        ],
        &[
            "vet",
            "model_2in.json",
            "v.kgl",
            "--data",
            "rows.csv",
            "--entry",
            "argmax",
        ],
    ] {
        c.fails(args, &["(see --help)"]);
    }
    c.fails(
        &["score", "v.kgl", "--data", "rows.csv", "--feed", "i8"],
        &[
            "invalid value 'i8' for '--feed <FEED>'",
            "[possible values: f32, i16, u8]",
        ],
    );
}

#[test]
fn c87_score_bad_blob_wrong_width_unknown_label() {
    let c = Case::new()
        .packed("v.kgl")
        .put("wide.csv", b"a,b,c\n1,2,3\n")
        .put("labelled.csv", b"a,b,y\n1,2,0\n3,4,7\n");
    c.fails(
        &["score", "rows.csv", "--data", "rows.csv", "-o", "s.csv"],
        &["rows.csv: not a valid model blob: not a Kinglet model: wrong magic bytes"],
    );
    c.fails(
        &["score", "v.kgl", "--data", "wide.csv", "-o", "s.csv"],
        &["wide.csv: 3 features per row, but the model takes 2 inputs"],
    );
    // The label of the file's second data row, even when --rows starts there.
    c.fails(
        &["score", "v.kgl", "--data", "labelled.csv", "--label", "y", "--rows", "1..2", "-o", "s.csv"],
        &["labelled.csv: bad label: data row 2 (1-based, header not counted): label \"7\" is not a class index (0 to 1)"],
    );
}

#[test]
fn c94_inspect_clock_that_is_not_a_clock() {
    let c = Case::new().packed("v.kgl");
    for bad in ["0", "-8", "nan", "inf", "1e9", "fast", ""] {
        c.fails(
            &["inspect", "v.kgl", "--clock-mhz", bad],
            &[
                "for '--clock-mhz <MHZ>': expected a clock in MHz, greater than 0 and at most 10000",
                "(see --help)",
            ],
        );
    }
}

#[test]
fn c95_inspect_load_address_that_is_not_an_address() {
    let c = Case::new().packed("v.kgl");
    for bad in ["0x", "0xZZ", "-4", "flash", "8k", ""] {
        c.fails(
            &["inspect", "v.kgl", "--load-address", bad],
            &["for '--load-address <ADDRESS>': expected an address: hex (0x08004000) or decimal digits"],
        );
    }
    for beyond in ["0x100000000", "4294967296", "0xFFFFFFFFFFFFFFFFFF"] {
        c.fails(
            &["inspect", "v.kgl", "--load-address", beyond],
            &["beyond the 32-bit address space of a Cortex-M core"],
        );
    }
}

#[test]
fn c96_inspect_blob_that_would_run_past_the_address_space() {
    let c = Case::new().packed("v.kgl");
    c.fails(
        &["inspect", "v.kgl", "--load-address", "0xFFFFFFF0", "--json"],
        &[
            "--load-address 0xfffffff0: the",
            "bytes of v.kgl would run past the end of the 32-bit address space",
        ],
    );
}

#[test]
fn inspect_says_whether_the_weights_are_aligned_and_gives_a_latency_range() {
    // With the integer input path, so that its estimates are there too.
    let c = Case::new().packed_with("v.kgl", &["--integer-input"]);
    let json = |args: &[&str]| -> serde_json::Value {
        let out = c.run(&[&["inspect", "v.kgl", "--json"], args].concat());
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).expect("JSON")
    };
    // The packer aligns the weights within the blob: aligned at any multiple of 4, not at
    // an odd address.
    for (address, aligned) in [
        ("0x08004000", true),
        ("0x08004001", false),
        ("134234114", false),
    ] {
        let j = json(&["--load-address", address]);
        assert_eq!(j["alignment"]["weights_aligned"], aligned, "{address}");
    }
    assert!(json(&[]).get("alignment").is_none());
    // At 64 MHz every estimate gets a range of instructions / 64 µs times the stated CPI.
    let j = json(&["--clock-mhz", "64"]);
    let estimates = j["instruction_estimate"].as_array().expect("estimates");
    assert!(!estimates.is_empty());
    for e in estimates {
        let n = e["instructions"].as_f64().expect("count");
        let l = &e["latency"];
        assert!(l["assumption"].as_str().unwrap().contains("from memory"));
        assert!(
            (l["low_us"].as_f64().unwrap() - n / 64.0).abs() < 1e-6,
            "{e}"
        );
        assert!(l["high_us"].as_f64().unwrap() > l["low_us"].as_f64().unwrap());
    }
    let text = c.run(&[
        "inspect",
        "v.kgl",
        "--clock-mhz",
        "64",
        "--load-address",
        "0x1",
    ]);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(
        text.contains("weights aligned  NO at load address 0x1"),
        "{text}"
    );
    assert!(
        text.contains("i16/u8 counts") && text.contains("at 64 MHz"),
        "{text}"
    );
    assert!(!text.contains("cycles (est.)"), "{text}");
}

#[test]
fn c90_budget_sizes_read_as_the_firmware_build_reads_them() {
    // Was: `--flash 32` alone asked for --board (which conflicts with it); 32K and 0.5 refused.
    let c = Case::new().packed("v.kgl");
    c.fails(
        &["budget", "v.kgl", "--flash", "32K"],
        &["the following required arguments were not provided: --ram <SIZE>"],
    );
    c.fails(
        &["budget", "v.kgl", "--flash", "32", "--ram", "8K"],
        &[
            "--flash",
            "32 bytes is smaller than any part; sizes are in bytes, write 32K for KiB",
        ],
    );
    c.fails(
        &["budget", "v.kgl", "--flash", "32K", "--ram", "0.3K"],
        &["--ram", "\"0.3K\" is not a whole number of bytes"],
    );
    c.fails(
        &["budget", "v.kgl", "--flash", "32 KB", "--ram", "8K"],
        &[
            "--flash",
            "expected a size such as 4096 (bytes), 32K or 32KiB, 1M",
        ],
    );
    let out = c.run(&["budget", "v.kgl", "--flash", "32K", "--ram", "4.5K"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("32 KiB flash, 4608 bytes RAM"), "{text}");
}

#[test]
fn c91_percentile_without_the_percentile_range() {
    // Was: silently ignored (the range stayed min/max).
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &["pack", "model_2in.json", "--calibration", "rows.csv", "--percentile", "99", "-o", "m.kgl"],
        &["--percentile applies to --range percentile only (the range method is minmax); add --range percentile"],
    );
}

#[test]
fn c92_a_label_column_in_the_calibration_rows_points_at_the_option() {
    let c = Case::new()
        .with("model_2in.json")
        .put("named.csv", b"a,b,kind\n1,2,ok\n3,4,worn\n")
        .put("indexed.csv", b"a,b,kind\n1,2,0\n3,4,1\n");
    c.fails(
        &["pack", "model_2in.json", "--calibration", "named.csv", "-o", "m.kgl"],
        &["named.csv: line 2, column 'kind': \"ok\" is not a number; if that column holds class labels, leave it out with --calibration-label kind"],
    );
    c.fails(
        &["pack", "model_2in.json", "--calibration", "indexed.csv", "-o", "m.kgl"],
        &["indexed.csv: 3 features per row, but the model takes 2 inputs; if one column holds class labels, leave it out with --calibration-label <name or index>"],
    );
}

#[test]
fn c120_correct_bias_on_a_float_pack() {
    let c = Case::new().with("model_2in.json");
    c.fails(
        &["pack", "model_2in.json", "--float", "--correct-bias", "-o", "m.kgl"],
        &["--correct-bias corrects for int8 weight rounding and --float keeps f32 weights; drop one of them"],
    );
}

#[test]
fn c122_fold_scaler_on_a_float_pack() {
    let c = Case::new().with("model_2in.json");
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--float",
            "--fold-scaler",
            "-o",
            "m.kgl",
        ],
        &["--fold-scaler chooses the int8 input and --float keeps f32 inputs; drop one of them"],
    );
}

#[test]
fn c121_percentile_with_the_least_error_range() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &["pack", "model_2in.json", "--calibration", "rows.csv", "--range", "least-error", "--percentile", "99", "-o", "m.kgl"],
        &["--percentile applies to --range percentile only (the range method is least-error); add --range percentile"],
    );
}

// ---- linear classifiers (tests/fixtures/linear/bad_*.onnx, from make_linear_cases.py) ----

fn pack_linear_fixture(name: &str, wants: &[&str]) -> String {
    let file = format!("{name}.onnx");
    Case::new()
        .with_repo(&format!("tests/fixtures/linear/{file}"), &file)
        .fails(&["pack", &file, "--float", "-o", "m.kgl"], wants)
}

#[test]
fn c97_linear_classifier_probit_or_softmax_zero() {
    for (name, post) in [
        ("bad_linear_probit", "PROBIT"),
        ("bad_linear_softmax_zero", "SOFTMAX_ZERO"),
    ] {
        pack_linear_fixture(
            name,
            &[
                "node 'LinearClassifier' (op LinearClassifier, domain ai.onnx.ml)",
                &format!("post_transform {post}; supported: NONE, SOFTMAX, LOGISTIC"),
            ],
        );
    }
}

#[test]
fn c98_per_class_logistic_without_normalizer() {
    pack_linear_fixture(
        "bad_linear_logistic_no_normalizer",
        &[
            "(op LinearClassifier, domain ai.onnx.ml)",
            "post_transform LOGISTIC on 3 scores without a Normalizer (L1)",
        ],
    );
}

#[test]
fn c99_linear_classifier_unknown_attribute() {
    pack_linear_fixture(
        "bad_linear_unknown_attribute",
        &[
            "(op LinearClassifier, domain ai.onnx.ml)",
            "attribute 'kernel_type' is not supported; supported: coefficients, intercepts",
        ],
    );
}

#[test]
fn c100_normalizer_other_than_l1() {
    pack_linear_fixture(
        "bad_normalizer_l2",
        &[
            "node 'Normalizer' (op Normalizer, domain ai.onnx.ml)",
            "norm L2; supported: L1",
        ],
    );
}

#[test]
fn c101_raw_score_column_other_than_the_positive_class() {
    pack_linear_fixture(
        "bad_svc_column_0",
        &[
            "(op ArrayFeatureExtractor, domain ai.onnx.ml)",
            "picks columns [0] of the two scores; supported: column [1]",
        ],
    );
}

#[test]
fn c102_sgd_log_loss_one_vs_rest_in_elementary_ops() {
    pack_linear_fixture(
        "bad_sgd_log_multiclass",
        &[
            "node 'Mul' (op Mul, domain ai.onnx)",
            "Mul with a constant after a dense layer",
        ],
    );
}

#[test]
fn c115_constant_that_is_not_a_pure_function_of_constants() {
    pack_onnx_fixture(
        "bad_constant_not_folded.onnx",
        &[
            "node 'noise_bias' (op RandomNormal, domain ai.onnx)",
            "computes a constant",
            "not folded at import; folded: Identity, Transpose, Cast",
        ],
    );
}

#[test]
fn c116_constant_cast_that_is_not_exact() {
    pack_onnx_fixture(
        "bad_fold_cast_fp16.onnx",
        &[
            "node 'weight_fp16' (op Cast, domain ai.onnx)",
            "Cast of a float constant to FLOAT16 is not folded",
        ],
    );
}

#[test]
fn c117_arithmetic_on_the_batch_size() {
    pack_onnx_fixture(
        "bad_shape_arith.onnx",
        &[
            "node 'double_batch' (op Mul, domain ai.onnx)",
            "in a computation on the data's shape: op Mul is not evaluated; supported: Shape, Gather",
        ],
    );
}

#[test]
fn c118_reshape_with_the_batch_size_not_first() {
    pack_onnx_fixture(
        "bad_shape_batch_last.onnx",
        &[
            "node 'flatten' (op Reshape, domain ai.onnx)",
            "the target shape has the batch size at position 1; supported: the batch size first",
        ],
    );
}

#[test]
fn c119_shape_of_undeclared_dims() {
    pack_onnx_fixture(
        "bad_shape_unknown_dim.onnx",
        &[
            "node 'shape' (op Shape, domain ai.onnx)",
            "dim 1 of the data's shape [?, ?, ?] is not known",
        ],
    );
}

// ---- Optional sections of format version 5 (C110–C114) ----

#[test]
fn c110_vet_integer_feed_on_a_blob_without_the_integer_path() {
    Case::new()
        .packed("v.kgl")
        .put("px.csv", b"a,b\n1,2\n3,4\n")
        .fails(
            &[
                "vet",
                "model_2in.json",
                "v.kgl",
                "--data",
                "px.csv",
                "--feed",
                "u8",
            ],
            &[
                "v.kgl has no integer input path (it was packed without --integer-input)",
                "--feed u8 cannot give it raw integers",
                "pack it again with --integer-input, or use --feed f32",
            ],
        );
}

#[test]
fn c111_score_integer_feed_on_a_blob_without_the_integer_path() {
    let c = Case::new()
        .packed("v.kgl")
        .put("px.csv", b"a,b\n1,2\n3,4\n");
    c.fails(
        &[
            "score", "v.kgl", "--data", "px.csv", "--feed", "i16", "-o", "s.csv",
        ],
        &[
            "v.kgl has no integer input path",
            "--feed i16 cannot give it raw integers",
        ],
    );
    // With the path kept, the same rows score.
    let c = Case::new()
        .packed_with("w.kgl", &["--integer-input"])
        .put("px.csv", b"a,b\n1,2\n3,4\n");
    let out = c.run(&["score", "w.kgl", "--data", "px.csv", "--feed", "i16"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn c112_integer_input_on_a_float_pack() {
    Case::new().with("model_2in.json").fails(
        &["pack", "model_2in.json", "--float", "--integer-input", "-o", "f.kgl"],
        &["--integer-input applies to int8 packs: an f32 blob takes i16/u8 inputs through its float scaler as it is"],
    );
}

#[test]
fn c113_weight_scales_on_a_float_pack() {
    Case::new().with("model_2in.json").fails(
        &[
            "pack",
            "model_2in.json",
            "--float",
            "--weight-scales",
            "-o",
            "f.kgl",
        ],
        &["--weight-scales applies to int8 packs: an f32 blob has no weight scales"],
    );
}

#[test]
fn c114_inspect_a_blob_with_a_partial_section() {
    // The integer input path with its shifts left out but its multipliers and addends kept.
    let c = Case::new().packed_with("m.kgl", &["--integer-input"]);
    let blob = c.read("m.kgl");
    let mut t = kinglet_builder::OwnedModel::from_desc(
        kinglet_runtime::Model::parse(&blob).unwrap().desc(),
    );
    t.input_quant.as_mut().unwrap().int_shift.clear();
    c.put("partial.kgl", &t.raw_blob()).fails(
        &["inspect", "partial.kgl"],
        &[
            "partial.kgl",
            "input stage: integer input tables length disagrees with the shape",
        ],
    );
}

#[test]
fn inspect_says_whether_the_blob_takes_integer_samples() {
    for (extra, says, estimates) in [
        (&[][..], "integer input path: no (f32 features only)", false),
        (
            &["--integer-input"][..],
            "integer input path: yes (f32 and i16/u8 samples)",
            true,
        ),
    ] {
        let c = Case::new().packed_with("v.kgl", extra);
        let out = c.run(&["inspect", "v.kgl"]);
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(text.contains(says), "{text}");
        // No instruction estimate for a path the blob refuses.
        assert_eq!(text.contains("i16/u8 counts"), estimates, "{text}");
        let out = c.run(&["inspect", "v.kgl", "--json"]);
        let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        assert_eq!(j["integer_input"], estimates);
    }
}

// ---- rows read a chunk at a time (`.npy` features streamed by vet and pack) ----

/// 20,000 rows of 2 features, more than one streamed chunk (16,384 rows), with `bad` at row
/// index 19,000, column index 1: found after a whole chunk has been run.
fn long_npy(bad: f32) -> Vec<u8> {
    let mut v: Vec<f32> = (0..40_000).map(|i| (i % 7) as f32 * 0.5 - 1.0).collect();
    v[19_000 * 2 + 1] = bad;
    npy_bytes(&[20_000, 2], &v)
}

#[test]
fn c127_truncated_npy_to_vet() {
    let full = npy_bytes(&[3, 2], &[0f32; 6]);
    let c = Case::new()
        .packed("m.kgl")
        .put("rows.npy", &full[..full.len() - 5]);
    c.fails(
        &[
            "vet",
            "model_2in.json",
            "m.kgl",
            "--data",
            "rows.npy",
            "--html",
            "r.html",
        ],
        &[
            "rows.npy",
            "the file is truncated: the header promises 24 bytes of data but 19 follow",
        ],
    );
}

#[test]
fn c128_nan_in_a_later_chunk_of_npy_calibration() {
    // The first pass has run a chunk when the NaN is read; the existing output stays as it was.
    let c = Case::new()
        .packed("m.kgl")
        .put("rows.npy", &long_npy(f32::NAN));
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.npy",
            "-o",
            "m.kgl",
        ],
        &["rows.npy", "row index 19000, column index 1: NaN"],
    );
}

#[test]
fn c129_infinity_in_a_later_chunk_of_vet_rows() {
    // Nothing on stdout (the report is written at the end) and no HTML file.
    let c = Case::new()
        .packed("m.kgl")
        .put("rows.npy", &long_npy(f32::INFINITY));
    c.fails(
        &[
            "vet",
            "model_2in.json",
            "m.kgl",
            "--data",
            "rows.npy",
            "--json",
            "--html",
            "r.html",
        ],
        &["rows.npy", "row index 19000, column index 1: inf"],
    );
}

#[test]
fn c130_late_row_that_drowns_the_biases_in_streamed_calibration() {
    // The streamed passes find the row; the pack names it as the whole-file pack does.
    let c = Case::new()
        .with("model_2in.json")
        .put("rows.npy", &long_npy(1e9));
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.npy",
            "-o",
            "m.kgl",
        ],
        &["rows.npy", "row index 19000", "drown every bias"],
    );
}

// ---- int4 weights (`pack --weights`, FORMAT.md §3.5) ----

#[test]
fn c123_weights_of_an_unknown_precision() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    for (spec, want) in [
        (
            "int2",
            "--weights: `int2` is neither int8, int4 nor LAYER:BITS (e.g. 0:int4,1:int8)",
        ),
        (
            "0:int3",
            "--weights: `int3` is not a weight precision: int8 or int4",
        ),
        (
            "one:int4",
            "--weights: `one` is not a layer index (0, 1, ...)",
        ),
    ] {
        c.fails(
            &[
                "pack",
                "model_2in.json",
                "--calibration",
                "rows.csv",
                "--weights",
                spec,
                "-o",
                "m.kgl",
            ],
            &[want],
        );
    }
}

#[test]
fn c124_weights_naming_a_layer_the_model_lacks() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &["pack", "model_2in.json", "--calibration", "rows.csv", "--weights", "0:int4,5:int4", "-o", "m.kgl"],
        &["cannot pack model_2in.json: --weights names layer 5, but the model has 2 layers (0 to 1)"],
    );
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--weights",
            "9:int4",
            "-o",
            "m.kgl",
        ],
        &["--weights: layer 9 is past the 8 layers a blob holds"],
    );
}

#[test]
fn c125_weights_on_a_float_pack() {
    let c = Case::new().with("model_2in.json");
    c.fails(
        &["pack", "model_2in.json", "--float", "--weights", "int4", "-o", "m.kgl"],
        &["--weights chooses int8 or int4 weights and --float keeps f32 weights; drop one of them"],
    );
}

#[test]
fn c126_weights_naming_a_layer_twice() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--weights",
            "0:int4,0:int8",
            "-o",
            "m.kgl",
        ],
        &["--weights: layer 0 is named twice"],
    );
}

#[test]
fn int4_pack_then_inspect_and_budget_show_the_int4_layer() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    let out = c.run(&[
        "pack",
        "model_2in.json",
        "--calibration",
        "rows.csv",
        "--weights",
        "0:int4",
        "-o",
        "m.kgl",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(
        text.contains("int4 weights on layer 1 (--weights index 0)"),
        "{text}"
    );
    let b = c.read("m.kgl");
    assert_eq!(u16::from_le_bytes([b[4], b[5]]), 6, "format version");
    let out = c.run(&["inspect", "m.kgl", "--json"]);
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let layers = j["layers"].as_array().unwrap();
    assert_eq!(layers[0]["weights"], "int4");
    assert_eq!(layers[1]["weights"], "int8");
    let out = c.run(&["inspect", "m.kgl"]);
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(text.contains("weights") && text.contains("int4"), "{text}");
    assert!(
        text.contains("int4 layers counted at the int8 rates"),
        "{text}"
    );
    let out = c.run(&["budget", "m.kgl", "--board", "m0-16k"]);
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(text.contains("int4 weights on layer 1:"), "{text}");
}

// ---- the weight-precision search (`pack --weights auto`, docs/precision-search.md) ----

/// Labelled held-out rows for the plain 2-input model.
const HELD: &[u8] = b"a,b,label\n1,2,1\n3,4,1\n-1,0.5,0\n2,-1,0\n0.5,0.5,1\n";

#[test]
fn c131_weights_auto_without_holdout_rows() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &["pack", "model_2in.json", "--calibration", "rows.csv", "--weights", "auto", "-o", "m.kgl"],
        &["--weights auto needs --holdout <rows.csv|rows.npy>: held-out rows (not the calibration rows)"],
    );
}

#[test]
fn c132_holdout_rows_that_are_the_calibration_file() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--weights",
            "auto",
            "--holdout",
            "./rows.csv",
            "-o",
            "m.kgl",
        ],
        &["--holdout ./rows.csv is the calibration file"],
    );
}

#[test]
fn c133_holdout_rows_without_weights_auto() {
    let c = Case::new()
        .with("model_2in.json")
        .with("rows.csv")
        .put("held.csv", HELD);
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--holdout",
            "held.csv",
            "--holdout-label",
            "label",
            "-o",
            "m.kgl",
        ],
        &["--holdout is for --weights auto"],
    );
}

/// Runs a search that picks nothing: exit code 1, the closest candidate named on stdout, no
/// blob written.
fn search_picks_nothing(extra: &[&str], says: &str) {
    let c = Case::new()
        .with("model_2in.json")
        .with("rows.csv")
        .put("held.csv", HELD);
    let mut args = vec![
        "pack",
        "model_2in.json",
        "--calibration",
        "rows.csv",
        "--weights",
        "auto",
        "--holdout",
        "held.csv",
        "--holdout-label",
        "label",
        "-o",
        "m.kgl",
    ];
    args.extend_from_slice(extra);
    let out = c.run(&args);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert_eq!(
        out.status.code(),
        Some(1),
        "{stdout}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains(says), "{stdout}");
    assert!(!c.listing().contains("m.kgl"), "a blob was written");
}

#[test]
fn c134_no_candidate_within_the_bound() {
    // A drop of at most -50 pp asks int8 to gain half the rows: nothing can.
    search_picks_nothing(
        &["--max-drop=-50"],
        "no candidate meets the bound; the closest is",
    );
}

#[test]
fn c135_no_candidate_within_the_flash_budget() {
    search_picks_nothing(
        &["--flash-budget", "64"],
        "no candidate fits the flash budget; the smallest within the bound is",
    );
}

// ---- The int16 input tensor of format version 7 and the headroom (C136–C140) ----

#[test]
fn c136_int16_input_with_the_raw_input_trial() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--input-tensor",
            "int16",
            "--fold-scaler",
            "-o",
            "m.kgl",
        ],
        &["--fold-scaler quantises the raw input to int8 and --input-tensor int16 keeps the scaler"],
    );
}

#[test]
fn c137_headroom_below_one_or_not_a_number() {
    for bad in ["0.5", "NaN", "inf"] {
        let c = Case::new().with("model_2in.json").with("rows.csv");
        c.fails(
            &[
                "pack",
                "model_2in.json",
                "--calibration",
                "rows.csv",
                "--headroom",
                bad,
                "-o",
                "m.kgl",
            ],
            &["--headroom must be a number ≥ 1 (1 keeps the calibrated ranges), got"],
        );
    }
}

#[test]
fn c138_int16_input_with_int4_weights_in_layer_1() {
    let c = Case::new().with("model_2in.json").with("rows.csv");
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--input-tensor",
            "int16",
            "--weights",
            "int4",
            "-o",
            "m.kgl",
        ],
        &["an int16 input tensor needs int8 weights in layer 1"],
    );
}

#[test]
fn c139_int16_input_with_the_precision_search() {
    let c = Case::new()
        .with("model_2in.json")
        .with("rows.csv")
        .put("held.csv", HELD);
    c.fails(
        &[
            "pack",
            "model_2in.json",
            "--calibration",
            "rows.csv",
            "--input-tensor",
            "int16",
            "--weights",
            "auto",
            "--holdout",
            "held.csv",
            "--holdout-label",
            "label",
            "-o",
            "m.kgl",
        ],
        &["--weights auto searches int8-input packs without headroom"],
    );
}

/// A first layer of 600 inputs whose weights are all equal: every one quantises to 127, so
/// `32768 · Σ|w| = 32768 · 76,200 ≈ 2.5 · 10^9` passes `2^31 − 1`, while `128 · Σ|w|` (an int8
/// input) is far within it.
#[test]
fn c140_int16_input_on_a_layer_too_wide_for_its_accumulator() {
    let n = 600;
    let row = vec!["0.01"; n].join(",");
    let model = format!(
        r#"{{"kinglet_model": 1, "input_width": {n}, "layers": [{{"inputs": {n}, "outputs": 2, "activation": "linear",
            "weights": [[{row}], [{row}]], "bias": [0, 0]}}], "output": "softmax"}}"#
    );
    let rows: String = (0..4)
        .map(|r| vec![format!("{}", r + 1); n].join(",") + "\n")
        .collect();
    let c = Case::new()
        .put("wide.json", model.as_bytes())
        .put("rows.csv", rows.as_bytes());
    c.fails(
        &[
            "pack",
            "wide.json",
            "--calibration",
            "rows.csv",
            "--input-tensor",
            "int16",
            "-o",
            "m.kgl",
        ],
        &["layer 0, output 0: with an int16 input the int32 accumulator could overflow (|bias| + 32768·Σ|w| = 2496921600 > 2^31 - 1)"],
    );
    // The same model packs with an int8 input.
    let out = c.run(&[
        "pack",
        "wide.json",
        "--calibration",
        "rows.csv",
        "-o",
        "m.kgl",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}
