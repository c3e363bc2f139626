//! `kinglet vet` through the real binary: exit codes, the reports it writes, and the messages
//! for bad input. These live in the converter crate because Cargo hands the binary's path
//! (`CARGO_BIN_EXE_kinglet`) only to the integration tests of the crate that builds it.
use kinglet_converter::dataset::{load_csv, CsvOptions};
use kinglet_converter::import::import_file;
use kinglet_converter::pack::{pack_f32, pack_int8_sections, Sections};
use kinglet_converter::quantise::calibrate::RangeMethod;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

/// A temporary directory holding the digits int8 blob and its f32 blob.
struct Setup {
    dir: tempfile::TempDir,
}

impl Setup {
    fn new() -> Self {
        let model = import_file(&repo("examples/digits/model.onnx")).unwrap();
        let calib = load_csv(
            &repo("examples/digits/calibration.csv"),
            &CsvOptions::default(),
        )
        .unwrap();
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(
            dir.path().join("digits.int8.kgl"),
            pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
                .unwrap()
                .blob,
        )
        .unwrap();
        std::fs::write(dir.path().join("digits.f32.kgl"), pack_f32(&model).unwrap()).unwrap();
        Setup { dir }
    }

    fn p(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// `kinglet vet <model.onnx> <int8> --data <data> <extra...>`.
    fn vet(&self, data: &Path, extra: &[&str]) -> Output {
        Command::new(env!("CARGO_BIN_EXE_kinglet"))
            .arg("vet")
            .arg(repo("examples/digits/model.onnx"))
            .arg(self.p("digits.int8.kgl"))
            .arg("--data")
            .arg(data)
            .args(extra)
            .output()
            .unwrap()
    }
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// Exit code 2 and a one-line error containing every `parts`.
fn fails_with(o: &Output, parts: &[&str]) {
    let err = text(&o.stderr);
    assert_eq!(
        o.status.code(),
        Some(2),
        "stderr: {err}\nstdout: {}",
        text(&o.stdout)
    );
    assert!(err.starts_with("kinglet: error: "), "{err}");
    for p in parts {
        assert!(err.contains(p), "missing {p:?} in: {err}");
    }
}

#[test]
fn text_report_json_and_html() {
    let s = Setup::new();
    let heldout = repo("examples/digits/heldout.csv");
    let html = s.p("report.html");
    let o = s.vet(
        &heldout,
        &[
            "--label",
            "label",
            "--max-drop",
            "0.5",
            "--html",
            html.to_str().unwrap(),
        ],
    );
    let out = text(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    for part in [
        "434 / 450",
        "Newcombe (1998)",
        "McNemar exact",
        "SQNR",
        "noise from clipping",
        "rounding alone (dB)",
        "layer 3",
        "PASS",
        "verdict: PASS",
    ] {
        assert!(out.contains(part), "missing {part:?} in:\n{out}");
    }
    // Not a terminal: no colour escapes.
    assert!(!out.contains('\x1b'));
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.starts_with("<!DOCTYPE html>") && page.trim_end().ends_with("</html>"));
    assert_eq!(
        page.matches("<svg").count(),
        4,
        "two heat maps, SQNR bars, histogram"
    );
    assert!(
        page.contains("<th>noise from clipping</th>")
            && page.contains("<th>rounding alone (dB)</th>")
    );
    assert!(
        !page.contains("http://")
            || page.matches("http://").count()
                == page.matches("xmlns=\"http://www.w3.org/2000/svg\"").count(),
        "fetches nothing"
    );

    let o = s.vet(&heldout, &["--label", "label", "--json"]);
    assert_eq!(o.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["accuracy"]["float"]["correct"], 434);
    assert_eq!(v["predictions"]["float"].as_array().unwrap().len(), 450);
    assert_eq!(v["fidelity"].as_array().unwrap().len(), 4);
    assert!(v["verdict"].is_null());
    for f in v["fidelity"].as_array().unwrap() {
        let e = &f["energy"];
        let n = |k: &str| e[k].as_f64().unwrap();
        assert!((n("clip_noise") + n("round_noise") - n("noise")).abs() <= 1e-9 * n("noise"));
        assert_eq!(f["clipped"], e["clipped"]);
        assert!(
            f["clip_share"].is_f64() && f["rounding_sqnr_db"].is_f64(),
            "{f}"
        );
    }

    // The f32 blob as the float model gives the same numbers as the ONNX file.
    let o2 = Command::new(env!("CARGO_BIN_EXE_kinglet"))
        .args(["vet"])
        .arg(s.p("digits.f32.kgl"))
        .arg(s.p("digits.int8.kgl"))
        .arg("--data")
        .arg(&heldout)
        .args(["--label", "label", "--json"])
        .output()
        .unwrap();
    let v2: serde_json::Value = serde_json::from_slice(&o2.stdout).unwrap();
    assert_eq!(v["accuracy"], v2["accuracy"]);
    assert_eq!(v["fidelity"], v2["fidelity"]);
}

#[test]
fn failed_gate_exits_1() {
    let s = Setup::new();
    let heldout = repo("examples/digits/heldout.csv");
    // The drop's upper 95% limit on 450 rows is about 0.79 pp: above a limit of 0.1 pp.
    let o = s.vet(
        &heldout,
        &["--label", "label", "--max-drop", "0.1", "--gate", "upper"],
    );
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    let out = text(&o.stdout);
    assert!(
        out.contains("FAIL") && out.contains("upper 95% limit"),
        "{out}"
    );
    // Every row agrees: 100 % agreement passes a 100 % limit.
    let o = s.vet(
        &heldout,
        &["--label", "label", "--min-agreement", "100", "--json"],
    );
    assert_eq!(o.status.code(), Some(0));
}

#[test]
fn labels_by_index_without_header() {
    let s = Setup::new();
    let o = s.vet(
        &repo("tests/fixtures/vet/noheader.csv"),
        &["--label", "64", "--header", "no", "--json"],
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["rows"], 3);
    assert_eq!(v["accuracy"]["float"]["rows"], 3);
}

#[test]
fn unlabelled_rows_report_agreement_but_refuse_an_accuracy_gate() {
    let s = Setup::new();
    let calib = repo("examples/digits/calibration.csv");
    let o = s.vet(&calib, &["--json"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(v["accuracy"].is_null());
    assert_eq!(v["agreement"]["rows"], 300);
    fails_with(
        &s.vet(&calib, &["--max-drop", "1"]),
        &["calibration.csv", "--max-drop needs labelled rows"],
    );
}

#[test]
fn bad_input_is_named() {
    let s = Setup::new();
    let f = |n: &str| repo(&format!("tests/fixtures/vet/{n}"));
    let label = ["--label", "label"];
    // A label the model does not know: data row 2 says 11, the classes are 0..9.
    fails_with(
        &s.vet(&f("bad_label.csv"), &label),
        &["bad_label.csv", "data row 2", "\"11\""],
    );
    // A row of the wrong width: line 4 has 64 fields, the header 65.
    fails_with(
        &s.vet(&f("ragged.csv"), &label),
        &["ragged.csv", "line 4", "64 fields"],
    );
    // NaN features: line 3, column f5.
    fails_with(
        &s.vet(&f("nan.csv"), &label),
        &["nan.csv", "line 3", "'f5'", "NaN"],
    );
    // An empty file.
    fails_with(&s.vet(&f("empty.csv"), &label), &["empty.csv", "empty"]);
    // Every row one feature short of the model's 64 inputs.
    fails_with(
        &s.vet(&f("narrow.csv"), &label),
        &["narrow.csv", "63 features", "64 inputs"],
    );
    // A label column that is not there.
    fails_with(
        &s.vet(&repo("examples/digits/heldout.csv"), &["--label", "digit"]),
        &["no column named \"digit\""],
    );
    // The models in the wrong order.
    let o = Command::new(env!("CARGO_BIN_EXE_kinglet"))
        .arg("vet")
        .arg(s.p("digits.int8.kgl"))
        .arg(s.p("digits.f32.kgl"))
        .arg("--data")
        .arg(repo("examples/digits/heldout.csv"))
        .output()
        .unwrap();
    fails_with(&o, &["the float model is an int8 blob"]);
    // A nonsense limit.
    fails_with(
        &s.vet(
            &repo("examples/digits/heldout.csv"),
            &["--label", "label", "--max-drop", "NaN"],
        ),
        &["--max-drop"],
    );
}

#[test]
fn c88_limits_say_their_own_unit_and_range() {
    // Was: --min-agreement 101 answered with --max-drop's wording, and -5 was accepted.
    let s = Setup::new();
    let heldout = repo("examples/digits/heldout.csv");
    for bad in ["101", "-5", "inf"] {
        let arg = format!("--min-agreement={bad}");
        fails_with(
            &s.vet(&heldout, &["--label", "label", &arg]),
            &["--min-agreement must be a percentage of rows between 0 and 100"],
        );
    }
    fails_with(
        &s.vet(&heldout, &["--label", "label", "--max-drop", "101"]),
        &["--max-drop must be a number of percentage points between -100 and 100, not 101"],
    );
    for edge in ["0", "100"] {
        let o = s.vet(&heldout, &["--label", "label", "--min-agreement", edge]);
        assert!(
            matches!(o.status.code(), Some(0 | 1)),
            "{}",
            text(&o.stderr)
        );
    }
}

#[test]
fn c89_models_of_different_widths_are_named_as_such() {
    // Was: "the float model and the int8 blob scale their inputs differently".
    let s = Setup::new();
    let vib = import_file(&repo("examples/vibration/model.onnx")).unwrap();
    std::fs::write(s.p("vib.f32.kgl"), pack_f32(&vib).unwrap()).unwrap();
    for float in [repo("examples/vibration/model.onnx"), s.p("vib.f32.kgl")] {
        let o = Command::new(env!("CARGO_BIN_EXE_kinglet"))
            .arg("vet")
            .arg(&float)
            .arg(s.p("digits.int8.kgl"))
            .arg("--data")
            .arg(repo("examples/digits/heldout.csv"))
            .output()
            .unwrap();
        fails_with(
            &o,
            &["the models take different inputs: float 15 features, int8 64"],
        );
    }
}

#[test]
fn the_measured_path_is_named_in_text_json_and_html() {
    let s = Setup::new();
    let heldout = repo("examples/digits/heldout.csv");
    let html = s.p("path.html");
    let path = ["--label", "label", "--feed", "u8", "--entry", "classify"];
    let mut args = path.to_vec();
    args.extend(["--html", html.to_str().unwrap()]);
    let o = s.vet(&heldout, &args);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let out = text(&o.stdout);
    for part in [
        "measured through Model::classify(Input::U8)",
        "runtime f32 path: Model::infer(Input::F32) on the same values",
        "0 rows where the int8 blob's Model::infer and Model::classify give different classes",
    ] {
        assert!(out.contains(part), "missing {part:?} in:\n{out}");
    }
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.contains("int8 measured through Model::classify(Input::U8)"));
    let mut args = path.to_vec();
    args.push("--json");
    let v: serde_json::Value = serde_json::from_slice(&s.vet(&heldout, &args).stdout).unwrap();
    assert_eq!(v["measured"]["feed"], "u8");
    assert_eq!(v["measured"]["entry"], "classify");
    assert_eq!(v["measured"]["float_call"], "Model::infer(Input::F32)");
    assert_eq!(v["entry_split"]["rows"], 0);
    // The digits pixels are whole numbers 0..=16. On them the blob's integer input stage gives
    // the int8 tensors its float stage gives (equal per-layer error sums), and classify gives
    // infer's class on every row, so this path's numbers equal the default path's.
    let v0: serde_json::Value =
        serde_json::from_slice(&s.vet(&heldout, &["--label", "label", "--json"]).stdout).unwrap();
    assert_eq!(v0["measured"]["int8_call"], "Model::infer(Input::F32)");
    assert_eq!(v["fidelity"], v0["fidelity"]);
    assert_eq!(v["accuracy"], v0["accuracy"]);
}

/// `kinglet vet` on the vibration example's held-out rows, int8 packed from its calibration set.
fn vibration_vet(dir: &Path, extra: &[&str]) -> Output {
    let blob = dir.join("vib.int8.kgl");
    if !blob.exists() {
        let model = import_file(&repo("examples/vibration/model.onnx")).unwrap();
        let calib = load_csv(
            &repo("examples/vibration/calibration.csv"),
            &CsvOptions::default(),
        )
        .unwrap();
        let p = pack_int8_sections(&model, &calib, RangeMethod::MinMax, Sections::INTEGER_INPUT)
            .unwrap();
        std::fs::write(&blob, p.blob).unwrap();
    }
    Command::new(env!("CARGO_BIN_EXE_kinglet"))
        .arg("vet")
        .arg(repo("examples/vibration/model.onnx"))
        .arg(&blob)
        .args(extra)
        .output()
        .unwrap()
}

#[test]
fn new_missed_faults_come_first_and_gate_the_exit_code() {
    let dir = tempfile::tempdir().unwrap();
    let heldout = repo("examples/vibration/heldout.csv");
    let data = ["--data", heldout.to_str().unwrap(), "--label", "label"];
    let json = |extra: &[&str]| -> serde_json::Value {
        let mut args = data.to_vec();
        args.extend_from_slice(extra);
        args.push("--json");
        let o = vibration_vet(dir.path(), &args);
        assert!(
            matches!(o.status.code(), Some(0 | 1)),
            "{}",
            text(&o.stderr)
        );
        serde_json::from_str(&text(&o.stdout)).unwrap()
    };
    let v = json(&["--benign", "normal"]);
    // Recount from the per-row predictions: a new miss is a fault row the float model got
    // right and int8 calls normal (class 0); a new false alarm is a normal row the float
    // model called normal and int8 calls a fault.
    let col = |k: &str| -> Vec<u64> {
        v["predictions"][k]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_u64().unwrap())
            .collect()
    };
    let (t, f, q) = (col("labels"), col("float"), col("int8"));
    let misses: Vec<u64> = (0..t.len())
        .filter(|&i| t[i] != 0 && f[i] == t[i] && q[i] == 0)
        .map(|i| i as u64 + 1)
        .collect();
    let alarms: Vec<u64> = (0..t.len())
        .filter(|&i| t[i] == 0 && f[i] == 0 && q[i] != 0)
        .map(|i| i as u64 + 1)
        .collect();
    let rows = |k: &str| -> Vec<u64> {
        v["faults"][k]
            .as_array()
            .unwrap()
            .iter()
            .map(|r| r["data_row"].as_u64().unwrap())
            .collect()
    };
    assert_eq!(rows("new_misses"), misses);
    assert_eq!(rows("new_false_alarms"), alarms);
    assert!(
        !misses.is_empty(),
        "the example has missed faults to show (rows 99 and 276)"
    );
    let per_class = v["faults"]["per_class"].as_array().unwrap();
    let summed: u64 = per_class
        .iter()
        .map(|c| c["new_misses"].as_u64().unwrap())
        .sum();
    assert_eq!(summed, misses.len() as u64);
    assert_eq!(v["faults"]["benign_names"][0], "normal");

    // First in the text report, and the gate.
    let n = misses.len().to_string();
    let mut args = data.to_vec();
    args.extend(["--benign", "0", "--max-new-misses", &n]);
    let o = vibration_vet(dir.path(), &args);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let out = text(&o.stdout);
    let faults = out.find("Faults (benign: normal)").unwrap();
    assert!(faults < out.find("Accuracy").unwrap(), "{out}");
    assert!(
        out.contains(&format!("new missed faults {n} ≤ {n}")),
        "{out}"
    );
    assert!(out.contains("does not replace validation on the device with field data"));
    let fewer = (misses.len() - 1).to_string();
    let mut args = data.to_vec();
    let html = dir.path().join("f.html");
    args.extend([
        "--benign",
        "normal",
        "--max-new-misses",
        &fewer,
        "--html",
        html.to_str().unwrap(),
    ]);
    let o = vibration_vet(dir.path(), &args);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.find("<h2>Faults</h2>").unwrap() < page.find("<h2>Summary</h2>").unwrap());
    assert!(page.contains("does not replace validation on the device with field data"));
}

#[test]
fn c93_benign_classes_must_name_real_classes_and_leave_a_fault() {
    let dir = tempfile::tempdir().unwrap();
    let heldout = repo("examples/vibration/heldout.csv");
    let data = ["--data", heldout.to_str().unwrap(), "--label", "label"];
    let run = |extra: &[&str]| {
        let mut args = data.to_vec();
        args.extend_from_slice(extra);
        vibration_vet(dir.path(), &args)
    };
    fails_with(
        &run(&["--benign", "healthy"]),
        &["--benign: class \"healthy\" is"],
    );
    fails_with(
        &run(&["--benign", "0,1,2,3"]),
        &["--benign names every class; leave at least one fault class"],
    );
    fails_with(&run(&["--max-new-misses", "0"]), &["--benign"]);
}

#[test]
fn repeated_rows_are_reported() {
    let dir = tempfile::tempdir().unwrap();
    let src = std::fs::read_to_string(repo("examples/vibration/heldout.csv")).unwrap();
    let mut lines: Vec<&str> = src.lines().collect();
    let copies: Vec<&str> = lines[1..4].to_vec();
    lines.extend(copies);
    let data = dir.path().join("rep.csv");
    std::fs::write(&data, lines.join("\n") + "\n").unwrap();
    let o = vibration_vet(
        dir.path(),
        &["--data", data.to_str().unwrap(), "--label", "label"],
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert!(
        text(&o.stdout).contains("note: 3 of the 603 rows repeat an earlier row exactly"),
        "{}",
        text(&o.stdout)
    );
}
