//! Tests of the graph walk (`normalise.rs`).
use super::super::test_graph::*;
use super::super::{import_onnx, OnnxImportError};
use crate::graph::{Activation, OutputKind, ScalerKind};

/// x[N,2] -> MatMul(W[2,3]) -> Add(b) -> Relu -> Gemm(B[3,2]^T) -> Softmax.
fn two_layer() -> (
    Vec<super::super::proto::NodeProto>,
    Vec<super::super::proto::TensorProto>,
) {
    let nodes = vec![
        node("mm", "MatMul", &["x", "W"], &["h0"]),
        node("bias", "Add", &["b", "h0"], &["h1"]),
        node("act", "Relu", &["h1"], &["h2"]),
        with_attr(
            node("fc2", "Gemm", &["h2", "B", "C"], &["z"]),
            attr_int("transB", 1),
        ),
        node("sm", "Softmax", &["z"], &["p"]),
    ];
    let inits = vec![
        floats("W", &[2, 3], &[1., 2., 3., 4., 5., 6.]),
        floats("b", &[1, 3], &[0.1, 0.2, 0.3]),
        floats("B", &[2, 3], &[1., 0., -1., 0.5, 0.5, 0.5]),
        floats("C", &[2], &[0.0, 1.0]),
    ];
    (nodes, inits)
}

fn import(
    nodes: Vec<super::super::proto::NodeProto>,
    inits: Vec<super::super::proto::TensorProto>,
    outs: &[&str],
) -> Result<crate::graph::FloatModel, OnnxImportError> {
    import_onnx(&model_bytes(graph(
        nodes,
        inits,
        vec![value("x", &[0, 2])],
        outs,
    )))
}

#[test]
fn matmul_add_relu_gemm_softmax() {
    let (nodes, inits) = two_layer();
    let m = import(nodes, inits, &["p"]).unwrap();
    assert_eq!(m.input_len, 2);
    assert_eq!(m.layers.len(), 2);
    assert_eq!(m.layers[0].weights, vec![1., 4., 2., 5., 3., 6.]);
    assert_eq!(m.layers[0].bias, vec![0.1, 0.2, 0.3]);
    assert_eq!(m.layers[0].activation, Activation::Relu);
    assert_eq!(m.layers[1].weights, vec![1., 0., -1., 0.5, 0.5, 0.5]);
    assert_eq!(m.layers[1].activation, Activation::Linear);
    assert_eq!(m.output, OutputKind::Softmax);
    assert!(m.scaler.is_none() && m.labels.is_empty());
    // Worked by hand for x = [1, 1]: h = relu([5, 7, 9] + b) = [5.1, 7.2, 9.3];
    // z = [5.1 - 9.3, 0.5 * 21.6 + 1] = [-4.2, 11.8].
    let y = m.forward_reference(&[1.0, 1.0]);
    let e = (-4.2f64 - 11.8).exp();
    assert!((y[1] - 1.0 / (1.0 + e)).abs() < 1e-6, "{y:?}");
}

#[test]
fn scaler_nodes_compose_before_the_first_layer() {
    let (mut nodes, mut inits) = two_layer();
    nodes[0].input[0] = "s1".into();
    nodes.insert(0, node("sub", "Sub", &["x", "mean"], &["s0"]));
    nodes.insert(1, node("div", "Div", &["s0", "std"], &["s1"]));
    inits.push(floats("mean", &[2], &[1.0, 2.0]));
    inits.push(floats("std", &[1, 2], &[2.0, 4.0]));
    let m = import(nodes, inits, &["p"]).unwrap();
    let s = m.scaler.unwrap();
    assert_eq!(
        (s.kind, s.offset, s.scale),
        (ScalerKind::Standardise, vec![1.0, 2.0], vec![0.5, 0.25])
    );
}

#[test]
fn misplaced_ops_name_the_node() {
    // A pointwise op the import does not know stays refused, naming the node and op.
    for op in ["Mish", "ThresholdedRelu", "PRelu", "Celu"] {
        let (mut nodes, inits) = two_layer();
        nodes[2].op_type = Some(op.into());
        let e = import(nodes, inits, &["p"]).unwrap_err();
        assert!(matches!(e, OnnxImportError::UnsupportedOp { .. }), "{op}");
        assert!(
            e.to_string()
                .contains(&format!("'act' (op {op}, domain ai.onnx)")),
            "{e}"
        );
    }
    // A known one becomes the layer's activation.
    let (mut nodes, inits) = two_layer();
    nodes[2].op_type = Some("Tanh".into());
    let m = import(nodes, inits, &["p"]).unwrap();
    assert_eq!(m.layers[0].activation.name(), "tanh");

    // Two activations on one layer: refused, naming the second.
    let (mut nodes, inits) = two_layer();
    let act_out = nodes[2].output[0].clone();
    nodes[2].output[0] = "r".into();
    nodes.insert(3, node("second", "Tanh", &["r"], &[&act_out]));
    let e = import(nodes, inits, &["p"]).unwrap_err();
    assert!(
        e.to_string().contains("'second'") && e.to_string().contains("Tanh after an activation"),
        "{e}"
    );

    let (mut nodes, inits) = two_layer();
    nodes.push(node("again", "Relu", &["p"], &["q"]));
    let e = import(nodes, inits, &["q"]).unwrap_err();
    assert!(
        e.to_string().contains("'again'") && e.to_string().contains("after the output function"),
        "{e}"
    );

    let (mut nodes, inits) = two_layer();
    nodes.insert(0, node("early", "Relu", &["x"], &["x1"]));
    nodes[1].input[0] = "x1".into();
    let e = import(nodes, inits, &["p"]).unwrap_err();
    assert!(
        e.to_string().contains("'early'") && e.to_string().contains("before the first dense layer"),
        "{e}"
    );
}

#[test]
fn width_mismatch_and_branching_are_rejected() {
    let (nodes, mut inits) = two_layer();
    inits[2] = floats("B", &[2, 4], &[0.0; 8]);
    let e = import(nodes, inits, &["p"]).unwrap_err();
    assert!(
        e.to_string().contains("'fc2'") && e.to_string().contains("take 4 inputs"),
        "{e}"
    );

    let (mut nodes, inits) = two_layer();
    nodes.push(node("side", "Relu", &["h2"], &["side_out"]));
    let e = import(nodes, inits, &["p", "side_out"]).unwrap_err();
    assert!(e.to_string().contains("read by"), "{e}");
}

#[test]
fn dropout_mask_must_be_unused() {
    let (mut nodes, inits) = two_layer();
    nodes[4].input[0] = "zd".into();
    nodes.insert(4, node("drop", "Dropout", &["z"], &["zd", "mask"]));
    let ok = import(nodes.clone(), inits.clone(), &["p"]).unwrap();
    assert_eq!(ok.layers.len(), 2);
    let e = import(nodes, inits, &["p", "mask"]).unwrap_err();
    assert!(
        e.to_string().contains("'drop'") && e.to_string().contains("'mask'"),
        "{e}"
    );
}

#[test]
fn label_branch_keeps_labels() {
    let (mut nodes, mut inits) = two_layer();
    nodes.push(with_attr(
        node("am", "ArgMax", &["p"], &["idx"]),
        attr_int("axis", 1),
    ));
    let mut afe = node(
        "afe",
        "ArrayFeatureExtractor",
        &["classes", "idx"],
        &["lab"],
    );
    afe.domain = Some("ai.onnx.ml".into());
    nodes.push(afe);
    nodes.push(node("rs", "Reshape", &["lab", "shp"], &["label"]));
    inits.push(int64s("classes", &[2], &[3, 7]));
    inits.push(int64s("shp", &[1], &[-1]));
    let m = import(nodes.clone(), inits.clone(), &["label", "p"]).unwrap();
    assert_eq!(m.labels, vec!["3", "7"]);
    inits[4] = int64s("classes", &[3], &[1, 2, 3]);
    let e = import(nodes, inits, &["label", "p"]).unwrap_err();
    assert!(
        e.to_string().contains("'am'") && e.to_string().contains("3 labels"),
        "{e}"
    );
}

/// x[N,2] -> Gemm(alpha 2) -> BatchNormalization -> Sigmoid -> Sub(1, p), Concat([1-p, p]).
fn binary(concat_inputs: [&str; 2]) -> Result<crate::graph::FloatModel, OnnxImportError> {
    let nodes = vec![
        with_attr(
            node("fc", "Gemm", &["x", "B", "C"], &["z0"]),
            attr_float("alpha", 2.0),
        ),
        with_attr(
            node(
                "bn",
                "BatchNormalization",
                &["z0", "g", "be", "mu", "var"],
                &["z"],
            ),
            attr_float("epsilon", 1.0),
        ),
        node("sig", "Sigmoid", &["z"], &["p"]),
        node("neg", "Sub", &["one", "p"], &["q"]),
        with_attr(
            node("cat", "Concat", &concat_inputs, &["probs"]),
            attr_int("axis", 1),
        ),
    ];
    let inits = vec![
        floats("B", &[2, 1], &[1.0, -1.0]),
        floats("C", &[1], &[0.5]),
        floats("g", &[1], &[4.0]),
        floats("be", &[1], &[0.25]),
        floats("mu", &[1], &[1.0]),
        floats("var", &[1], &[3.0]),
        floats("one", &[], &[1.0]),
    ];
    import(nodes, inits, &["probs"])
}

#[test]
fn two_class_sigmoid_form_with_alpha_and_bn() {
    let m = binary(["q", "p"]).unwrap();
    assert_eq!(m.output, OutputKind::Sigmoid);
    assert_eq!(m.layers.len(), 1);
    // alpha 2: w = [2, -2]; BN k = 4 / sqrt(3 + 1) = 2: w' = [4, -4],
    // b' = (0.5 - 1) * 2 + 0.25 = -0.75.
    assert_eq!(m.layers[0].weights, vec![4.0, -4.0]);
    assert_eq!(m.layers[0].bias, vec![-0.75]);
    let e = binary(["p", "q"]).unwrap_err();
    assert!(
        e.to_string().contains("'cat' (op Concat") && e.to_string().contains("[1 - p, p]"),
        "{e}"
    );
}

#[test]
fn no_dense_layer_is_an_error() {
    let nodes = vec![node("id", "Identity", &["x"], &["y"])];
    let e = import(nodes, vec![], &["y"]).unwrap_err();
    assert!(e.to_string().contains("no dense layer"), "{e}");
}

#[test]
fn garbage_bytes_do_not_panic() {
    let (nodes, inits) = two_layer();
    let bytes = model_bytes(graph(nodes, inits, vec![value("x", &[0, 2])], &["p"]));
    for cut in [1, 7, bytes.len() / 3, bytes.len() / 2, bytes.len() - 1] {
        assert!(import_onnx(&bytes[..cut]).is_err(), "cut at {cut}");
    }
    assert!(matches!(import_onnx(&[]), Err(OnnxImportError::NoGraph)));
    assert!(matches!(
        import_onnx(&[0xff, 0xff, 0xff]),
        Err(OnnxImportError::Decode(_))
    ));
}

fn ml(mut n: super::super::proto::NodeProto) -> super::super::proto::NodeProto {
    n.domain = Some("ai.onnx.ml".into());
    n
}

fn attr_str(name: &str, s: &str) -> super::super::proto::AttributeProto {
    super::super::proto::AttributeProto {
        name: Some(name.into()),
        s: Some(s.as_bytes().to_vec()),
        r#type: Some(super::super::proto::attr_type::STRING),
        ..Default::default()
    }
}

fn attr_strs(name: &str, v: &[&str]) -> super::super::proto::AttributeProto {
    super::super::proto::AttributeProto {
        name: Some(name.into()),
        strings: v.iter().map(|s| s.as_bytes().to_vec()).collect(),
        r#type: Some(super::super::proto::attr_type::STRINGS),
        ..Default::default()
    }
}

/// LinearClassifier over x[N,2] with three string labels and `post`.
fn linear3(post: &str) -> super::super::proto::NodeProto {
    let mut n = ml(node("lc", "LinearClassifier", &["x"], &["label", "scores"]));
    for a in [
        attr_floats("coefficients", &[1., 0., 0., 1., -1., -1.]),
        attr_floats("intercepts", &[0.5, 0.0, -0.5]),
        attr_strs("classlabels_strings", &["low", "mid", "high"]),
        attr_str("post_transform", post),
    ] {
        n = with_attr(n, a);
    }
    n
}

#[test]
fn linear_classifier_with_string_labels_and_label_output() {
    let m = import(vec![linear3("SOFTMAX")], vec![], &["label", "scores"]).unwrap();
    assert_eq!(m.output, OutputKind::Softmax);
    assert_eq!(m.labels, ["low", "mid", "high"]);
    assert_eq!((m.layers[0].inputs, m.layers[0].outputs), (2, 3));
    assert_eq!(m.layers[0].bias, vec![0.5, 0.0, -0.5]);
    // x = [1, 2]: scores [1.5, 2, -3.5]; NONE keeps them.
    let raw = import(vec![linear3("NONE")], vec![], &["scores"]).unwrap();
    assert_eq!(raw.forward_reference(&[1.0, 2.0]), vec![1.5, 2.0, -3.5]);
}

#[test]
fn linear_classifier_logistic_with_l1_normalizer_is_one_vs_rest() {
    let norm = with_attr(
        ml(node("nz", "Normalizer", &["scores"], &["p"])),
        attr_str("norm", "L1"),
    );
    let m = import(vec![linear3("LOGISTIC"), norm], vec![], &["label", "p"]).unwrap();
    assert_eq!(m.output, OutputKind::OneVsRest);
    // x = [0, 0]: σ(0.5), σ(0), σ(-0.5) = 0.622459, 0.5, 0.377541, sum 1.5.
    let y = m.forward_reference(&[0.0, 0.0]);
    assert!((y[1] - 0.5 / 1.5).abs() < 1e-9, "{y:?}");
    assert!((y[0] - 0.622_459_33 / 1.5).abs() < 1e-7, "{y:?}");
}

#[test]
fn linear_classifier_misuse_is_refused() {
    // The label output read by another node.
    let cast = with_attr(node("c", "Cast", &["label"], &["l2"]), attr_int("to", 1));
    let e = import(vec![linear3("NONE"), cast], vec![], &["l2", "scores"]).unwrap_err();
    assert!(
        e.to_string()
            .contains("label output 'label' is read by other nodes"),
        "{e}"
    );
    // A Softmax after it: the output function is already set.
    let sm = node("sm", "Softmax", &["scores"], &["p"]);
    let e = import(vec![linear3("NONE"), sm], vec![], &["p"]).unwrap_err();
    assert!(
        e.to_string().contains("Softmax after the output function"),
        "{e}"
    );
    // Normalizer L1 on raw scores.
    let norm = with_attr(
        ml(node("nz", "Normalizer", &["scores"], &["p"])),
        attr_str("norm", "L1"),
    );
    let e = import(vec![linear3("NONE"), norm], vec![], &["p"]).unwrap_err();
    assert!(e.to_string().contains("on raw scores"), "{e}");
    // multi_class 2.
    let odd = with_attr(linear3("NONE"), attr_int("multi_class", 2));
    let e = import(vec![odd], vec![], &["scores"]).unwrap_err();
    assert!(
        e.to_string().contains("multi_class = 2; supported: 0 or 1"),
        "{e}"
    );
    // Coefficients that do not fit the input width.
    let mut wide = linear3("NONE");
    wide.attribute[0] = attr_floats("coefficients", &[1.; 9]);
    let e = import(vec![wide], vec![], &["scores"]).unwrap_err();
    assert!(
        e.to_string()
            .contains("9 coefficients for 2 input features"),
        "{e}"
    );
}

/// `two_layer` with its Relu replaced by the decomposed Gelu `x · ½ · (1 + erf(x / c))`, the
/// products in `order`, `c` the divisor.
fn decomposed_gelu(c: f32, half_first: bool) -> Result<crate::graph::FloatModel, OnnxImportError> {
    let (mut nodes, mut inits) = two_layer();
    let gelu = if half_first {
        vec![
            node("g_div", "Div", &["h1", "c"], &["d"]),
            node("g_erf", "Erf", &["d"], &["e"]),
            node("g_add", "Add", &["one", "e"], &["gp"]),
            node("g_half", "Mul", &["half", "h1"], &["hx"]),
            node("g_mul", "Mul", &["hx", "gp"], &["h2"]),
        ]
    } else {
        vec![
            node("g_div", "Div", &["h1", "c"], &["d"]),
            node("g_erf", "Erf", &["d"], &["e"]),
            node("g_add", "Add", &["e", "one"], &["gp"]),
            node("g_mul", "Mul", &["h1", "gp"], &["m"]),
            node("g_half", "Mul", &["m", "half"], &["h2"]),
        ]
    };
    nodes.splice(2..3, gelu);
    inits.push(floats("c", &[], &[c]));
    inits.push(floats("one", &[], &[1.0]));
    inits.push(floats("half", &[], &[0.5]));
    import(nodes, inits, &["p"])
}

#[test]
fn decomposed_gelu_is_matched_by_structure_and_constants() {
    for half_first in [false, true] {
        let m = decomposed_gelu(std::f32::consts::SQRT_2, half_first).unwrap();
        assert_eq!(m.layers.len(), 2);
        assert_eq!(m.layers[0].activation.name(), "gelu", "{half_first}");
    }
    // Another divisor is another function: refused, not approximated.
    let e = decomposed_gelu(1.5, false).unwrap_err();
    assert!(
        e.to_string()
            .contains("value 'h1' is read by this node and by"),
        "{e}"
    );
}
