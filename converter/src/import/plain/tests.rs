use std::path::Path;

use npyz::Order;

use super::*;
use crate::dataset::npy_array::tests::write_npy;
use crate::error_line::ErrorLine;
use crate::graph::{Activation, FloatModel, OutputKind, ScalerKind};

fn import(json: &str) -> Result<FloatModel, PlainImportError> {
    import_plain_str(json, Path::new("."))
}

fn err(json: &str) -> String {
    import(json).unwrap_err().line()
}

/// A 2-input, 3-hidden, 2-output model; `w0` and `b0` are JSON for layer 0.
fn two_layer(w0: &str, b0: &str, tail: &str) -> String {
    format!(
        r#"{{"kinglet_model": 1, "input_width": 2,
            "layers": [
              {{"inputs": 2, "outputs": 3, "activation": "relu", "weights": {w0}, "bias": {b0}}},
              {{"inputs": 3, "outputs": 2, "activation": "linear",
                "weights": [[1, 0, -1], [0.5, 0.5, 0.5]], "bias": [0, 1]}}
            ],
            "output": "none"{tail}}}"#
    )
}

const NESTED_OUT_IN: &str = "[[1, 2], [3, 4], [-5, 6]]";

#[test]
fn nested_model_and_hand_computed_forward() {
    let m = import(&two_layer(NESTED_OUT_IN, "[0.5, 0, 1]", "")).unwrap();
    assert_eq!(m.input_len, 2);
    assert_eq!(m.output, OutputKind::Logits);
    assert!(m.scaler.is_none() && m.labels.is_empty());
    assert_eq!(m.layers.len(), 2);
    let l0 = &m.layers[0];
    assert_eq!(
        (l0.inputs, l0.outputs, l0.activation),
        (2, 3, Activation::Relu)
    );
    assert_eq!(l0.weights, vec![1.0, 2.0, 3.0, 4.0, -5.0, 6.0]);
    assert_eq!(m.layers[1].activation, Activation::Linear);
    // x = [1, 1]: h = relu([1+2+0.5, 3+4+0, -5+6+1]) = [3.5, 7, 2]
    // y = [3.5 - 2, 0.5 * 12.5 + 1] = [1.5, 7.25]
    assert_eq!(m.forward_reference(&[1.0, 1.0]), vec![1.5, 7.25]);
}

#[test]
fn flat_and_in_out_layouts_give_the_same_model() {
    let nested = import(&two_layer(NESTED_OUT_IN, "[0, 0, 0]", "")).unwrap();
    let forms = [
        r#"{"layout": "out_in", "values": [1, 2, 3, 4, -5, 6]}"#,
        r#"{"layout": "out_in", "values": [[1, 2], [3, 4], [-5, 6]]}"#,
        // Keras kernel [inputs][outputs]: the transpose.
        r#"{"layout": "in_out", "values": [[1, 3, -5], [2, 4, 6]]}"#,
        r#"{"layout": "in_out", "values": [1, 3, -5, 2, 4, 6]}"#,
    ];
    for w in forms {
        assert_eq!(
            import(&two_layer(w, "[0, 0, 0]", "")).unwrap(),
            nested,
            "{w}"
        );
    }
}

#[test]
fn npy_weights_and_bias_relative_to_base_dir() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("w")).unwrap();
    // Keras kernel [2][3] as float32, Fortran order; bias float64.
    // Kernel [[1, 3, -5], [2, 4, 6]] stored column-major: 1, 2, 3, 4, -5, 6.
    write_npy(
        &dir.path().join("w/k0.npy"),
        &[1.0f32, 2.0, 3.0, 4.0, -5.0, 6.0],
        &[2, 3],
        Order::Fortran,
    );
    write_npy(
        &dir.path().join("w/b0.npy"),
        &[0.5f64, 0.0, 1.0],
        &[3],
        Order::C,
    );
    let json = two_layer(
        r#"{"layout": "in_out", "npy": "w/k0.npy"}"#,
        r#"{"npy": "w/b0.npy"}"#,
        "",
    );
    let m = import_plain_str(&json, dir.path()).unwrap();
    let inline = import(&two_layer(NESTED_OUT_IN, "[0.5, 0, 1]", "")).unwrap();
    assert_eq!(m, inline);

    // PyTorch weight [3][2] float64, given by absolute path.
    let abs = dir.path().join("w0.npy");
    write_npy(&abs, &[1.0f64, 2.0, 3.0, 4.0, -5.0, 6.0], &[3, 2], Order::C);
    let w = format!(
        r#"{{"layout": "out_in", "npy": {:?}}}"#,
        abs.display().to_string()
    );
    let m = import_plain_str(&two_layer(&w, "[0.5, 0, 1]", ""), Path::new("/nonexistent")).unwrap();
    assert_eq!(m, inline);
}

#[test]
fn npy_problems_name_layer_field_and_file() {
    let dir = tempfile::tempdir().unwrap();
    write_npy(&dir.path().join("k.npy"), &[0.0f32; 6], &[3, 2], Order::C);
    let json = two_layer(r#"{"layout": "in_out", "npy": "k.npy"}"#, "[0, 0, 0]", "");
    let e = import_plain_str(&json, dir.path()).unwrap_err().line();
    assert!(e.starts_with("layers[0].weights: "), "{e}");
    assert!(
        e.contains("k.npy: shape [3, 2], but layout in_out ([inputs, outputs]) needs [2, 3]"),
        "{e}"
    );

    write_npy(&dir.path().join("ki.npy"), &[0i64; 6], &[2, 3], Order::C);
    let json = two_layer(r#"{"layout": "in_out", "npy": "ki.npy"}"#, "[0, 0, 0]", "");
    let e = import_plain_str(&json, dir.path()).unwrap_err().line();
    assert!(
        e.contains("element type int64; weights and biases must be float32 or float64"),
        "{e}"
    );

    let json = two_layer(
        r#"{"layout": "in_out", "npy": "missing.npy"}"#,
        "[0, 0, 0]",
        "",
    );
    let e = import_plain_str(&json, dir.path()).unwrap_err();
    assert!(
        matches!(
            e,
            PlainImportError::Npy {
                layer: 0,
                field: "weights",
                ..
            }
        ),
        "{e}"
    );

    write_npy(&dir.path().join("b.npy"), &[0.0f32; 3], &[1, 3], Order::C);
    let json = two_layer(NESTED_OUT_IN, r#"{"npy": "b.npy"}"#, "");
    let e = import_plain_str(&json, dir.path()).unwrap_err().line();
    assert!(
        e.starts_with("layers[0].bias: ") && e.contains("shape [1, 3]"),
        "{e}"
    );

    std::fs::write(dir.path().join("junk.npy"), b"not numpy").unwrap();
    let json = two_layer(NESTED_OUT_IN, r#"{"npy": "junk.npy"}"#, "");
    let e = import_plain_str(&json, dir.path()).unwrap_err();
    assert!(
        matches!(e, PlainImportError::Npy { field: "bias", .. }),
        "{e}"
    );
}

#[test]
fn nan_and_f32_overflow_weights_are_rejected() {
    let dir = tempfile::tempdir().unwrap();
    write_npy(
        &dir.path().join("k.npy"),
        &[0.0f32, 0.0, 0.0, 0.0, 0.0, f32::NAN],
        &[3, 2],
        Order::C,
    );
    let json = two_layer(r#"{"layout": "out_in", "npy": "k.npy"}"#, "[0, 0, 0]", "");
    let e = import_plain_str(&json, dir.path()).unwrap_err().line();
    assert_eq!(
        e,
        "layers[0].weights: NaN at output 2, input 1 is not a finite f32"
    );

    let e = err(&two_layer("[[1, 2], [3, 1e39], [5, 6]]", "[0, 0, 0]", ""));
    assert_eq!(
        e,
        "layers[0].weights: 1e39 at output 1, input 1 is not a finite f32"
    );
    let e = err(&two_layer(NESTED_OUT_IN, "[0, -1e39, 0]", ""));
    assert!(
        e.starts_with("layers[0].bias: ") && e.contains("at output 1 "),
        "{e}"
    );
}

#[test]
fn weight_shape_errors() {
    let e = err(&two_layer(
        r#"{"layout": "out_in", "values": [1, 2, 3, 4, 5]}"#,
        "[0, 0, 0]",
        "",
    ));
    assert_eq!(
        e,
        "layers[0].weights: 5 values, but inputs * outputs = 2 * 3 = 6"
    );
    let e = err(&two_layer("[[1, 2], [3, 4]]", "[0, 0, 0]", ""));
    assert_eq!(
        e,
        "layers[0].weights: 2 rows, but layout out_in ([outputs][inputs]) needs 3"
    );
    let e = err(&two_layer(
        r#"{"layout": "in_out", "values": [[1, 2, 3], [4, 5]]}"#,
        "[0, 0, 0]",
        "",
    ));
    assert_eq!(
        e,
        "layers[0].weights: row 1 has 2 values, but layout in_out needs 3 per row"
    );
    let e = err(&two_layer("[1, 2, 3, 4, 5, 6]", "[0, 0, 0]", ""));
    assert!(e.contains("a flat list needs its layout"), "{e}");
    let e = err(&two_layer("[[1, 2], 3, [5, 6]]", "[0, 0, 0]", ""));
    assert!(e.contains("mixes numbers and rows"), "{e}");
    let e = err(&two_layer("[]", "[0, 0, 0]", ""));
    assert!(e.contains("0 values, but inputs * outputs"), "{e}");
    let e = err(&two_layer(r#"{"layout": "out_in"}"#, "[0, 0, 0]", ""));
    assert_eq!(
        e,
        "layers[0].weights: give exactly one of \"values\" and \"npy\""
    );
    let e = err(&two_layer(
        r#"{"layout": "out_in", "values": [], "npy": "x.npy"}"#,
        "[0, 0, 0]",
        "",
    ));
    assert!(e.contains("exactly one of"), "{e}");
    let e = err(&two_layer(NESTED_OUT_IN, "[0, 0]", ""));
    assert_eq!(e, "layers[0].bias: 2 values, but the layer has 3 outputs");
}

#[test]
fn layers_must_chain() {
    let e = err(
        r#"{"kinglet_model": 1, "input_width": 3, "output": "none", "layers": [
        {"inputs": 2, "outputs": 1, "activation": "linear", "weights": [[1, 1]], "bias": [0]}]}"#,
    );
    assert_eq!(
        e,
        "layers[0].inputs is 2, but input_width is 3: the layers do not chain"
    );
    let e = err(
        r#"{"kinglet_model": 1, "input_width": 2, "output": "none", "layers": [
        {"inputs": 2, "outputs": 2, "activation": "relu", "weights": [[1, 1], [1, 1]], "bias": [0, 0]},
        {"inputs": 3, "outputs": 1, "activation": "linear", "weights": [[1, 1, 1]], "bias": [0]}]}"#,
    );
    assert_eq!(
        e,
        "layers[1].inputs is 3, but layers[0].outputs is 2: the layers do not chain"
    );
}

#[test]
fn empty_and_zero_sized() {
    let e = err(r#"{"kinglet_model": 1, "input_width": 2, "output": "none", "layers": []}"#);
    assert_eq!(
        e,
        "\"layers\" is empty; a model has at least one dense layer"
    );
    let e = err(r#"{"kinglet_model": 1, "input_width": 0, "output": "none", "layers": []}"#);
    assert!(e.contains("\"input_width\" is 0"), "{e}");
    let e = err(
        r#"{"kinglet_model": 1, "input_width": 2, "output": "none", "layers": [
        {"inputs": 2, "outputs": 0, "activation": "linear", "weights": [], "bias": []}]}"#,
    );
    assert_eq!(
        e,
        "layers[0].outputs is 0; a layer has at least one input and one output"
    );
}

#[test]
fn version_tag() {
    let body = two_layer(NESTED_OUT_IN, "[0, 0, 0]", "");
    let e = err(&body.replace(
        "\"kinglet_model\": 1",
        "\"kinglet_model\": 2, \"new_field\": true",
    ));
    assert_eq!(
        e,
        "unsupported \"kinglet_model\" version 2; this converter reads version 1"
    );
    let e = err(&body.replace("\"kinglet_model\": 1", "\"kinglet_model\": \"1\""));
    assert!(e.contains("version \"1\""), "{e}");
    let e = err(&body.replace("\"kinglet_model\": 1,", ""));
    assert!(e.starts_with("not a Kinglet model description"), "{e}");
    assert!(matches!(import("[1, 2]"), Err(PlainImportError::NotAModel)));
    assert!(matches!(import("1"), Err(PlainImportError::NotAModel)));
    assert!(matches!(
        import("{\"kinglet_model\": 1,"),
        Err(PlainImportError::Syntax(_))
    ));
    let e = err("{\"kinglet_model\": 1, \"input_width\": 2,}");
    assert_eq!(e, "not valid JSON: trailing comma at line 1 column 39");
}

#[test]
fn unknown_fields_and_bad_values_say_where() {
    let e = err(&two_layer(
        NESTED_OUT_IN,
        "[0, 0, 0]",
        r#", "comment": "x""#,
    ));
    assert!(e.contains("unknown field `comment`"), "{e}");
    let e = err(&two_layer(
        r#"{"layot": "in_out", "values": [1]}"#,
        "[0, 0, 0]",
        "",
    ));
    assert!(e.starts_with("at `layers[0].weights"), "{e}");
    assert!(e.contains("unknown field `layot`"), "{e}");
    let e = err(&two_layer(
        r#"{"layout": "columns", "values": [1]}"#,
        "[0, 0, 0]",
        "",
    ));
    assert!(
        e.starts_with("at `layers[0].weights.layout`") && e.contains("unknown variant `columns`"),
        "{e}"
    );
    let body = two_layer(NESTED_OUT_IN, "[0, 0, 0]", "");
    let e = err(&body.replace("\"linear\"", "\"tanh\""));
    assert!(
        e.starts_with("at `layers[1].activation`") && e.contains("unknown variant `tanh`"),
        "{e}"
    );
    assert!(e.contains("line "), "{e}");
    let e = err(&body.replace("\"none\"", "\"argmax\""));
    assert!(e.starts_with("at `output`"), "{e}");
    let e = err(&two_layer(
        NESTED_OUT_IN,
        r#"{"npy": "b.npy", "dtype": "f4"}"#,
        "",
    ));
    assert!(
        e.starts_with("at `layers[0].bias") && e.contains("unknown field `dtype`"),
        "{e}"
    );
    let e = err(&body.replace(
        "\"activation\": \"relu\",",
        "\"activation\": \"relu\", \"units\": 3,",
    ));
    assert!(
        e.starts_with("at `layers[0]") && e.contains("unknown field `units`"),
        "{e}"
    );
    let e = err(&two_layer("[[1, 2], [3, \"4\"], [5, 6]]", "[0, 0, 0]", ""));
    assert!(e.starts_with("at `layers[0].weights"), "{e}");
}

#[test]
fn output_functions_and_labels() {
    let soft = |labels: &str| {
        import(&two_layer(NESTED_OUT_IN, "[0, 0, 0]", labels).replace("\"none\"", "\"softmax\""))
    };
    let m = soft(r#", "labels": ["no", "yes"]"#).unwrap();
    assert_eq!(m.output, OutputKind::Softmax);
    assert_eq!(m.labels, vec!["no".to_string(), "yes".to_string()]);
    let s: f64 = m.forward_reference(&[0.3, -0.2]).iter().sum();
    assert!((s - 1.0).abs() < 1e-12);
    let e = soft(r#", "labels": ["a", "b", "c"]"#).unwrap_err().line();
    assert_eq!(e, "\"labels\" has 3 names, but the model has 2 classes");
    let e = soft(r#", "labels": ["a", "a"]"#).unwrap_err().line();
    assert_eq!(e, "labels[1] repeats labels[0] (\"a\")");
    let e = soft(r#", "labels": ["a", " "]"#).unwrap_err().line();
    assert_eq!(e, "labels[1] is empty");

    let e = err(&two_layer(NESTED_OUT_IN, "[0, 0, 0]", "").replace("\"none\"", "\"sigmoid\""));
    assert!(e.contains("needs a last layer with 1 output"), "{e}");

    let single = |output: &str, labels: &str| {
        import(&format!(
            r#"{{"kinglet_model": 1, "input_width": 1, "output": "{output}"{labels}, "layers": [
            {{"inputs": 1, "outputs": 1, "activation": "linear", "weights": [[2]], "bias": [0]}}]}}"#
        ))
    };
    let m = single("sigmoid", r#", "labels": ["ok", "faulty"]"#).unwrap();
    assert_eq!(m.output, OutputKind::Sigmoid);
    assert_eq!(m.classes(), 2);
    // sigmoid(2 * 0) = 0.5
    assert_eq!(m.forward_reference(&[0.0]), vec![0.5]);
    let e = single("sigmoid", r#", "labels": ["faulty"]"#)
        .unwrap_err()
        .line();
    assert!(
        e.contains("has 1 names, but the model has 2 classes (a sigmoid model has two"),
        "{e}"
    );
    let e = single("softmax", "").unwrap_err().line();
    assert!(
        e.contains("softmax\" over a single output is always 1"),
        "{e}"
    );
}

#[test]
fn inline_scaler() {
    let m = import(&two_layer(
        NESTED_OUT_IN,
        "[0, 0, 0]",
        r#", "scaler": {"mean": [1, 2], "std": [2, 4]}"#,
    ))
    .unwrap();
    let s = m.scaler.as_ref().unwrap();
    assert_eq!(s.kind, ScalerKind::Standardise);
    assert_eq!(s.apply(&[3.0, 6.0]), vec![1.0, 1.0]);
    let m = import(&two_layer(
        NESTED_OUT_IN,
        "[0, 0, 0]",
        r#", "scaler": {"divide_by": 255}"#,
    ))
    .unwrap();
    assert_eq!(m.scaler.unwrap().kind, ScalerKind::Uniform);
    let e = err(&two_layer(
        NESTED_OUT_IN,
        "[0, 0, 0]",
        r#", "scaler": {"mean": [1, 2, 3], "std": [1, 1, 1]}"#,
    ));
    assert!(
        e.starts_with("scaler: the scaler has 3 values per list, but the model takes 2 inputs"),
        "{e}"
    );
    let e = err(&two_layer(
        NESTED_OUT_IN,
        "[0, 0, 0]",
        r#", "scaler": {"mean": [1, 2], "std": [1, 0]}"#,
    ));
    assert!(
        e.starts_with("scaler: feature 1 (0-based) has std 0"),
        "{e}"
    );
    let e = err(&two_layer(
        NESTED_OUT_IN,
        "[0, 0, 0]",
        r#", "scaler": {"mean": [1, 2], "sd": [1, 1]}"#,
    ));
    assert!(
        e.starts_with("at `scaler") && e.contains("unknown field `sd`"),
        "{e}"
    );
}

#[test]
fn file_entry_point_names_the_file_and_uses_its_directory() {
    let dir = tempfile::tempdir().unwrap();
    write_npy(
        &dir.path().join("b.npy"),
        &[0.5f32, 0.0, 1.0],
        &[3],
        Order::C,
    );
    let p = dir.path().join("model.json");
    std::fs::write(&p, two_layer(NESTED_OUT_IN, r#"{"npy": "b.npy"}"#, "")).unwrap();
    let m = import_plain_file(&p).unwrap();
    assert_eq!(m.layers[0].bias, vec![0.5, 0.0, 1.0]);

    std::fs::write(&p, two_layer(NESTED_OUT_IN, "[0]", "")).unwrap();
    let e = import_plain_file(&p).unwrap_err().line();
    assert_eq!(
        e,
        format!(
            "{}: layers[0].bias: 1 values, but the layer has 3 outputs",
            p.display()
        )
    );
    let e = import_plain_file(&dir.path().join("none.json")).unwrap_err();
    assert!(matches!(e, PlainImportError::Io { .. }), "{e}");
}
