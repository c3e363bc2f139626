//! `kinglet pack` calibration reports through the real binary: the per-tensor table and JSON
//! (clipped values, far values, spread), the warnings for a range a few values set, and what
//! following a warning's advice does to accuracy (`kinglet vet` on the vibration held-out rows).
//! The bad-input rows that end in an error are in `cli_bad_inputs.rs`; these are the rows of
//! `docs/bad-inputs.md` that end in a warning or a report (C73, C74).
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// A scratch directory with the vibration model and a calibration file `cal.csv`: the header
/// and the first 50 rows of the example's calibration set, then `extra` (a whole row).
struct Setup {
    dir: tempfile::TempDir,
}

impl Setup {
    fn new(extra: Option<&str>) -> Self {
        let dir = tempfile::tempdir().unwrap();
        let src = std::fs::read_to_string(repo("examples/vibration/calibration.csv")).unwrap();
        let mut csv: Vec<String> = src.lines().take(51).map(str::to_string).collect();
        csv.extend(extra.map(|v| vec![v; 15].join(",")));
        std::fs::write(dir.path().join("cal.csv"), csv.join("\n") + "\n").unwrap();
        std::fs::copy(
            repo("examples/vibration/model.onnx"),
            dir.path().join("vib.onnx"),
        )
        .unwrap();
        Setup { dir }
    }

    fn run(&self, args: &[&str]) -> Output {
        Command::new(env!("CARGO_BIN_EXE_kinglet"))
            .args(args)
            .current_dir(self.dir.path())
            .output()
            .unwrap()
    }

    /// `pack vib.onnx --calibration cal.csv <extra> -o <out>`; must exit 0.
    fn pack(&self, out: &str, extra: &[&str]) -> Output {
        let mut args = vec!["pack", "vib.onnx", "--calibration", "cal.csv"];
        args.extend_from_slice(extra);
        args.extend_from_slice(&["-o", out]);
        let o = self.run(&args);
        assert_eq!(o.status.code(), Some(0), "{args:?}: {}", text(&o.stderr));
        o
    }

    /// Int8 accuracy of `blob` on the 600 held-out rows, by `kinglet vet --json`.
    fn int8_accuracy(&self, blob: &str) -> (u64, u64) {
        let held = repo("examples/vibration/heldout.csv");
        let o = self.run(&[
            "vet",
            "vib.onnx",
            blob,
            "--data",
            held.to_str().unwrap(),
            "--label",
            "label",
            "--json",
        ]);
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        let acc = &v["accuracy"];
        // examples/vibration/README.md (train.py): the float model gets 592 of 600 right.
        assert_eq!(acc["float"]["correct"], 592);
        (
            acc["int8"]["correct"].as_u64().unwrap(),
            acc["int8"]["rows"].as_u64().unwrap(),
        )
    }
}

fn warning_lines(o: &Output) -> Vec<String> {
    text(&o.stderr)
        .lines()
        .map(|l| {
            l.strip_prefix("kinglet: warning: ")
                .unwrap_or_else(|| panic!("not a warning line: {l}"))
                .to_string()
        })
        .collect()
}

#[test]
fn c73_one_far_row_warns_and_the_advice_restores_accuracy() {
    // A row of 1e6 in every feature: finite, and inside what the first layer's biases make
    // plausible (so no error), but it sets every tensor's min/max range. Regression: pack used
    // to say nothing.
    let s = Setup::new(Some("1e6"));
    let o = s.pack("minmax.kgl", &["--json"]);
    let warnings = warning_lines(&o);
    assert_eq!(warnings.len(), 4, "one per tensor: {warnings:?}");
    for (w, tensor) in warnings.iter().zip([
        "input",
        "layer 1 output",
        "layer 2 output",
        "layer 3 output",
    ]) {
        assert!(
            w.starts_with(&format!("cal.csv: {tensor}: the range [")),
            "{w}"
        );
        for part in [
            "in row 51 (1-based, header not counted)",
            "times narrower (under one of the 255 int8 steps)",
            // 765 input values, 15 far: ⌊100 · 749 / 764⌋ to two decimals.
            "use --range percentile --percentile 98.03 to clip them",
        ] {
            assert!(w.contains(part), "{part:?} missing in {w}");
        }
    }
    assert!(
        warnings[0].contains("is set by 15 of 765 values"),
        "{}",
        warnings[0]
    );
    // stdout stays one JSON document, which carries the same warnings and the statistics.
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let cal = &v["calibration"];
    assert_eq!(cal["warnings"], serde_json::json!(warnings));
    let input = &cal["tensors"][0];
    assert_eq!(input["tensor"], "input");
    assert_eq!(input["far_above"], 15);
    assert_eq!(input["far_rows"], serde_json::json!([50]));
    assert_eq!(input["dominated"], true);
    assert!(input["spread"].as_f64().unwrap() > 255.0, "{input}");

    // As the warning says: no warning, and the far row is clipped in every tensor.
    let o = s.pack(
        "clipped.kgl",
        &["--range", "percentile", "--percentile", "98.03", "--json"],
    );
    assert!(o.stderr.is_empty(), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    for t in v["calibration"]["tensors"].as_array().unwrap() {
        assert_eq!(t["dominated"], false, "{t}");
        assert!(t["spread"].as_f64().unwrap() <= 1.0, "{t}");
    }

    // Accuracy on the held-out rows: with min/max every ordinary row falls into one input step
    // and the int8 model is near chance (4 balanced classes); with the advice it is within
    // 1.5 points of the float model's 592 (common practice for int8, no source).
    let (before, rows) = s.int8_accuracy("minmax.kgl");
    let (after, _) = s.int8_accuracy("clipped.kgl");
    eprintln!("vibration + one row of 1e6: int8 {before}/{rows} with min/max, {after}/{rows} with percentile 98.03 (float 592)");
    assert!(before <= 200, "{before}/{rows}");
    assert!(after >= 583, "{after}/{rows}");
}

#[test]
fn c74_the_default_percentile_clips_a_small_set_and_says_so() {
    // Regression: with the rank rounded on n - 1, percentile 99.99 clipped nothing on any
    // tensor of 5,000 values or fewer. 50 rows give 750 input values; the linear rank
    // (n - 1) · 0.9999 = 748.93 falls short of the largest value and (n - 1) · 0.0001 = 0.075
    // above the smallest, so exactly one value is clipped at each end (all distinct here).
    let s = Setup::new(None);
    let o = s.pack("p.kgl", &["--range", "percentile", "--json"]);
    assert!(o.stderr.is_empty(), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let cal = &v["calibration"];
    assert_eq!(cal["method"], "percentile 99.99");
    let input = &cal["tensors"][0];
    assert_eq!(input["values"], 750);
    assert_eq!(
        (
            input["clipped_below"].clone(),
            input["clipped_above"].clone()
        ),
        (1.into(), 1.into())
    );
    assert!(
        input["max"].as_f64() < input["observed_max"].as_f64(),
        "{input}"
    );
    // The text report shows the same counts in its calibration table.
    let o = s.pack("p.kgl", &["--range", "percentile"]);
    let out = text(&o.stdout);
    assert!(out.contains("clipped (below/above)"), "{out}");
    let row = out
        .lines()
        .find(|l| l.starts_with('│') && l.contains(" input "))
        .unwrap_or_else(|| panic!("no input row in {out}"));
    assert!(row.contains("1 / 1"), "{row}");
}

#[test]
fn pack_json_keeps_inspect_json_order_and_f32_digits() {
    // Was: pack --json sorted its keys and widened every f32 to f64 digits
    // (0.040186092 printed as 0.04018609225749969), unlike inspect --json on the same blob.
    let s = Setup::new(None);
    let packed = text(&s.pack("m.kgl", &["--json"]).stdout);
    let inspected = text(&s.run(&["inspect", "m.kgl", "--json"]).stdout);
    let body = |t: &str| -> Vec<String> {
        t.lines()
            .filter(|l| !l.starts_with("  \"blob\""))
            .map(str::to_string)
            .collect()
    };
    let (p, i) = (body(&packed), body(&inspected));
    // The report's lines, in order, then pack's own notes and calibration.
    let closing = i.len() - 1;
    assert_eq!(
        &p[..closing - 1],
        &i[..closing - 1],
        "{packed}\n{inspected}"
    );
    assert!(
        packed.starts_with("{\n  \"blob\": \"m.kgl\",\n"),
        "{packed}"
    );
    let notes = packed.find("\"notes\"").unwrap();
    let calibration = packed.find("\"calibration\"").unwrap();
    assert!(packed.find("\"layers\"").unwrap() < notes && notes < calibration);
    // The input scale as written: the shortest digits that read back as the same f32.
    let v: serde_json::Value = serde_json::from_str(&packed).unwrap();
    let q = v["input_quant"][0].as_f64().unwrap() as f32;
    assert!(
        packed.contains(&format!("\"input_quant\": [\n    {q},")),
        "{packed}"
    );
}

#[test]
fn least_error_and_bias_correction_through_the_binary() {
    let s = Setup::new(None);
    let o = s.pack(
        "le.kgl",
        &["--range", "least-error", "--correct-bias", "--json"],
    );
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let cal = &v["calibration"];
    assert_eq!(cal["method"], "least-error");
    assert_eq!(cal["bias_correction"], true);
    assert!(v["notes"][0]
        .as_str()
        .unwrap()
        .ends_with("(least-error, biases corrected for the int8 weight rounding)"));
    // Every range lies within the observed values (the grid only shrinks min/max).
    for t in cal["tensors"].as_array().unwrap() {
        let f = |k: &str| t[k].as_f64().unwrap();
        assert!(
            f("min") >= f("observed_min") && f("max") <= f("observed_max"),
            "{t}"
        );
    }
    let o = s.pack("le2.kgl", &["--range", "least-error"]);
    let t = text(&o.stdout);
    assert!(t.contains("calibration (least-error, 50 rows;"), "{t}");
    // The correction changes the blob (its biases) and nothing else about the pack.
    let read = |f: &str| std::fs::read(s.dir.path().join(f)).unwrap();
    let (a, b) = (read("le.kgl"), read("le2.kgl"));
    assert_eq!(a.len(), b.len());
    assert_ne!(a, b);
    let (correct, rows) = s.int8_accuracy("le.kgl");
    assert_eq!(rows, 600);
    // Float: 592 / 600; int8 min/max: 591 / 600 (docs/calibration.md).
    assert!(correct >= 585, "{correct}");
}

#[test]
fn least_error_keeps_a_range_that_one_far_row_sets() {
    // The squared error of clipping the 1e6 row's 15 input values (≈ 15 · 6.4e4² / 765) is far
    // above the rounding error of wide steps, so the least-error range keeps them, and the
    // warning of C73 stays: the method minimises the error on the calibration values, far
    // values included (docs/calibration.md).
    let s = Setup::new(Some("1e6"));
    let o = s.pack("le.kgl", &["--range", "least-error"]);
    let err = text(&o.stderr);
    assert!(
        err.contains("input: the range [-2.933, 6.45e4] is set by 15 of 765 values")
            && err.contains("use --range percentile --percentile 98.03 to clip them"),
        "{err}"
    );
}

#[test]
fn fold_scaler_measures_both_inputs_and_says_which_it_kept() {
    // digits: whole pixels 0 to 16 and a standardising scaler. Folding makes the input exact but
    // coarsens layer 1 (docs/vet.md, "Calibration choices on digits"), so the scaled input wins
    // on the calibration rows; vibration: the features are not whole numbers.
    let dir = tempfile::tempdir().unwrap();
    let run = |args: &[&str]| {
        let o = Command::new(env!("CARGO_BIN_EXE_kinglet"))
            .args(args)
            .current_dir(dir.path())
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
        serde_json::from_slice::<serde_json::Value>(&o.stdout).unwrap()
    };
    let m = repo("examples/digits/model.onnx");
    let c = repo("examples/digits/calibration.csv");
    let v = run(&[
        "pack",
        m.to_str().unwrap(),
        "--calibration",
        c.to_str().unwrap(),
        "--fold-scaler",
        "--json",
        "-o",
        "d.kgl",
    ]);
    let r = &v["calibration"]["raw_input"];
    assert_eq!(r["kept"], "scaled", "{r}");
    let (scaled, folded) = (
        r["scaled_sqnr_db"].as_f64().unwrap(),
        r["folded_sqnr_db"].as_f64().unwrap(),
    );
    assert!(scaled > folded, "{r}");
    let note = v["notes"][1].as_str().unwrap();
    assert!(note.starts_with("--fold-scaler: kept the scaled input (SQNR of the last layer's output on the calibration rows: raw input with the scaler folded into layer 1 "), "{note}");
    // The kept blob is the plain pack.
    let v2 = run(&[
        "pack",
        m.to_str().unwrap(),
        "--calibration",
        c.to_str().unwrap(),
        "--json",
        "-o",
        "plain.kgl",
    ]);
    assert!(v2["calibration"].get("raw_input").is_none());
    let read = |f: &str| std::fs::read(dir.path().join(f)).unwrap();
    assert_eq!(read("d.kgl"), read("plain.kgl"));
    let m = repo("examples/vibration/model.onnx");
    let c = repo("examples/vibration/calibration.csv");
    let v = run(&[
        "pack",
        m.to_str().unwrap(),
        "--calibration",
        c.to_str().unwrap(),
        "--fold-scaler",
        "--json",
        "-o",
        "v.kgl",
    ]);
    let r = &v["calibration"]["raw_input"];
    assert_eq!(r["kept"], "scaled");
    assert!(
        r["reason"]
            .as_str()
            .unwrap()
            .contains("not all whole numbers"),
        "{r}"
    );
}
