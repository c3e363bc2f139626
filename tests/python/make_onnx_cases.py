#!/usr/bin/env python3
"""Builds the ONNX import fixtures under tests/fixtures/onnx/ (or the directory given).

For every valid model it writes NAME.onnx and NAME.json; the JSON holds input rows and the
outputs of onnx.reference.ReferenceEvaluator (the onnx package's reference implementation),
plus scikit-learn's predict_proba for the scikit-learn pipelines. Malformed models are written
as bad_*.onnx (no JSON; tests/tests/onnx_import.rs knows what error each must give).

Run with the reference venv:  .venv/bin/python tests/python/make_onnx_cases.py [OUT_DIR]
Every random draw is seeded, so the output reproduces.
"""

import json
import sys
import warnings
from pathlib import Path

import numpy as np
import onnx
import sklearn
import skl2onnx
from onnx import TensorProto, helper, numpy_helper
from onnx.reference import ReferenceEvaluator

OPSET = [helper.make_opsetid("", 13)]
OPSET_ML = [helper.make_opsetid("", 13), helper.make_opsetid("ai.onnx.ml", 1)]
REF_SOURCE = f"onnx.reference.ReferenceEvaluator (onnx {onnx.__version__})"


def f32(name, array):
    """Initializer in raw_data (what numpy_helper writes)."""
    return numpy_helper.from_array(np.asarray(array, dtype=np.float32), name)


def f32_typed(name, array):
    """Initializer in the typed float_data field."""
    a = np.asarray(array, dtype=np.float32)
    return helper.make_tensor(name, TensorProto.FLOAT, a.shape, a.flatten().tolist(), raw=False)


def i64_typed(name, values):
    return helper.make_tensor(name, TensorProto.INT64, [len(values)], list(values), raw=False)


def inp(name, dims):
    return helper.make_tensor_value_info(name, TensorProto.FLOAT, dims)


def out(name, dims=None, elem=TensorProto.FLOAT):
    return helper.make_tensor_value_info(name, elem, dims)


def model(nodes, inits, inputs, outputs, opset=OPSET, name="g"):
    g = helper.make_graph(nodes, name, inputs, outputs, initializer=inits)
    m = helper.make_model(g, opset_imports=opset, producer_name="kinglet-fixtures", ir_version=8)
    return m


def write(out_dir, name, m):
    path = out_dir / f"{name}.onnx"
    path.write_bytes(m.SerializeToString())
    return path


def rows(rng, n, width, scale=1.0):
    return np.round(rng.normal(0.0, scale, size=(n, width)), 3)


def save_valid(out_dir, name, m, x, input_shape, meta, output_name=None):
    """Checks the model, evaluates it with the reference evaluator, writes NAME.onnx/.json."""
    onnx.checker.check_model(m)
    x32 = np.asarray(x, dtype=np.float64).astype(np.float32)
    feed = x32.reshape([x32.shape[0]] + list(input_shape[1:]))
    ref = ReferenceEvaluator(m)
    names = [o.name for o in m.graph.output]
    output_name = output_name or names[-1]
    result = ref.run(None, {m.graph.input[0].name: feed})
    y = np.asarray(result[names.index(output_name)], dtype=np.float32)
    write(out_dir, name, m)
    doc = {
        "model": f"{name}.onnx",
        "input_shape": [d if isinstance(d, int) else None for d in input_shape],
        "inputs": [[float(v) for v in r] for r in np.asarray(x, dtype=np.float64)],
        "expected": {
            "source": REF_SOURCE,
            "output": output_name,
            "rows": [[float(v) for v in r] for r in y.reshape(y.shape[0], -1)],
        },
    }
    doc.update(meta)
    (out_dir / f"{name}.json").write_text(json.dumps(doc, separators=(",", ":")) + "\n")
    return y


def dense_params(*shapes):
    """Parameter count of dense layers given (in, out) pairs: in*out + out each."""
    return int(sum(i * o + o for i, o in shapes))


# ----------------------------------------------------------------------------------------------
# Hand-built graphs, one per supported pattern.


def gemm_alpha_beta(out_dir):
    rng = np.random.default_rng(101)
    w1 = rng.normal(0, 0.5, (8, 6))  # transB = 1: [out, in]
    c1 = rng.normal(0, 0.1, (1, 8))
    w2 = rng.normal(0, 0.5, (8, 3))  # transB = 0: [in, out]
    c2 = rng.normal(0, 0.1, (3,))
    nodes = [
        helper.make_node("Gemm", ["x", "W1", "C1"], ["h"], name="fc1", transB=1, alpha=0.5, beta=2.0),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        helper.make_node("Gemm", ["a", "W2", "C2"], ["z"], name="fc2", transB=0, alpha=1.5, beta=0.25),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax", axis=-1),
    ]
    m = model(nodes, [f32("W1", w1), f32("C1", c1), f32("W2", w2), f32("C2", c2)], [inp("x", ["N", 6])], [out("p", ["N", 3])])
    save_valid(out_dir, "gemm_transb_alpha_beta", m, rows(rng, 10, 6), ["N", 6],
               {"pattern": "Gemm transB=1 alpha/beta, Relu, Gemm transB=0 alpha/beta, Softmax",
                "output_kind": "softmax", "params": dense_params((6, 8), (8, 3))})


def matmul_add_row_bias(out_dir):
    rng = np.random.default_rng(102)
    w1 = rng.normal(0, 0.5, (5, 7))
    b1 = rng.normal(0, 0.1, (1, 7))
    w2 = rng.normal(0, 0.5, (7, 4))
    b2 = rng.normal(0, 0.1, (4,))
    nodes = [
        helper.make_node("MatMul", ["x", "W1"], ["m1"], name="matmul1"),
        helper.make_node("Add", ["m1", "B1"], ["h1"], name="bias1"),
        helper.make_node("Relu", ["h1"], ["a1"], name="relu1"),
        helper.make_node("MatMul", ["a1", "W2"], ["m2"], name="matmul2"),
        # The constant on the left side of the Add.
        helper.make_node("Add", ["B2", "m2"], ["z"], name="bias2"),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax", axis=1),
    ]
    # Opset 11: Softmax's old semantics with an explicit axis 1.
    m = model(nodes, [f32("W1", w1), f32("B1", b1), f32("W2", w2), f32("B2", b2)], [inp("x", ["N", 5])],
              [out("p", ["N", 4])], opset=[helper.make_opsetid("", 11)])
    save_valid(out_dir, "matmul_add_row_bias", m, rows(rng, 10, 5), ["N", 5],
               {"pattern": "MatMul + Add([1,out] bias), Relu, MatMul + Add(bias on the left), Softmax axis 1 (opset 11)",
                "output_kind": "softmax", "params": dense_params((5, 7), (7, 4))})


def batchnorm_fold(out_dir):
    rng = np.random.default_rng(103)
    w1 = rng.normal(0, 0.5, (6, 4))
    c1 = rng.normal(0, 0.1, (6,))
    gamma = rng.uniform(0.5, 1.5, 6)
    beta = rng.normal(0, 0.2, 6)
    mean = rng.normal(0, 0.5, 6)
    var = rng.uniform(0.2, 2.0, 6)
    w2 = rng.normal(0, 0.5, (3, 6))
    c2 = rng.normal(0, 0.1, (3,))
    nodes = [
        helper.make_node("Gemm", ["x", "W1", "C1"], ["h"], name="fc1", transB=1),
        helper.make_node("BatchNormalization", ["h", "gamma", "beta", "mean", "var"], ["hn"], name="bn1", epsilon=1e-3),
        helper.make_node("Relu", ["hn"], ["a"], name="relu1"),
        helper.make_node("Gemm", ["a", "W2", "C2"], ["z"], name="fc2", transB=1),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
    ]
    inits = [f32("W1", w1), f32("C1", c1), f32("gamma", gamma), f32("beta", beta), f32("mean", mean), f32("var", var),
             f32("W2", w2), f32("C2", c2)]
    m = model(nodes, inits, [inp("x", ["N", 4])], [out("p", ["N", 3])], opset=[helper.make_opsetid("", 15)])
    save_valid(out_dir, "batchnorm_fold", m, rows(rng, 10, 4), ["N", 4],
               {"pattern": "Gemm, BatchNormalization (folded), Relu, Gemm, Softmax",
                "output_kind": "softmax", "params": dense_params((4, 6), (6, 3))})


def noop_removal(out_dir):
    rng = np.random.default_rng(104)
    w1 = rng.normal(0, 0.5, (4, 5))
    c1 = rng.normal(0, 0.1, (5,))
    w2 = rng.normal(0, 0.5, (5, 2))
    c2 = rng.normal(0, 0.1, (2,))
    nodes = [
        helper.make_node("Cast", ["x"], ["xc"], name="cast_in", to=TensorProto.FLOAT),
        helper.make_node("Identity", ["xc"], ["xi"], name="ident_in"),
        helper.make_node("Gemm", ["xi", "W1", "C1"], ["h"], name="fc1"),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        # The mask output is declared but unused.
        helper.make_node("Dropout", ["a", "ratio"], ["ad", "mask"], name="dropout1"),
        helper.make_node("Gemm", ["ad", "W2", "C2"], ["z"], name="fc2"),
        helper.make_node("Softmax", ["z"], ["p0"], name="softmax"),
        helper.make_node("Identity", ["p0"], ["p"], name="ident_out"),
    ]
    inits = [f32("W1", w1), f32("C1", c1), f32("W2", w2), f32("C2", c2), f32("ratio", np.float32(0.3))]
    m = model(nodes, inits, [inp("x", ["N", 4])], [out("p", ["N", 2])])
    save_valid(out_dir, "noop_removal", m, rows(rng, 10, 4), ["N", 4],
               {"pattern": "Cast(float), Identity, Dropout (mask unused) removed",
                "output_kind": "softmax", "params": dense_params((4, 5), (5, 2))})


def flatten_and_reshape(out_dir):
    rng = np.random.default_rng(105)
    w = rng.normal(0, 0.3, (12, 3))
    c = rng.normal(0, 0.1, (3,))
    nodes = [
        helper.make_node("Flatten", ["x"], ["xf"], name="flatten", axis=1),
        helper.make_node("Gemm", ["xf", "W", "C"], ["p"], name="fc"),
    ]
    m = model(nodes, [f32("W", w), f32("C", c)], [inp("x", ["N", 2, 3, 2])], [out("p", ["N", 3])])
    save_valid(out_dir, "flatten_input", m, rows(rng, 10, 12), ["N", 2, 3, 2],
               {"pattern": "Flatten [N,2,3,2] -> [N,12], Gemm, logits", "output_kind": "logits",
                "params": dense_params((12, 3))})

    w2 = rng.normal(0, 0.3, (16, 4))
    b2 = rng.normal(0, 0.1, (4,))
    nodes = [
        helper.make_node("Reshape", ["x", "shape"], ["xr"], name="reshape"),
        helper.make_node("MatMul", ["xr", "W"], ["m"], name="matmul"),
        helper.make_node("Add", ["m", "B"], ["z"], name="bias"),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
    ]
    m = model(nodes, [i64_typed("shape", [-1, 16]), f32("W", w2), f32("B", b2)], [inp("x", ["N", 1, 4, 4])], [out("p", ["N", 4])])
    save_valid(out_dir, "reshape_input", m, rows(rng, 10, 16), ["N", 1, 4, 4],
               {"pattern": "Reshape [N,1,4,4] by [-1,16] (typed int64), MatMul + Add, Softmax",
                "output_kind": "softmax", "params": dense_params((16, 4))})


def scalers(out_dir):
    rng = np.random.default_rng(106)
    width, hidden, classes = 5, 6, 3
    w1 = rng.normal(0, 0.5, (width, hidden))
    b1 = rng.normal(0, 0.1, (hidden,))
    w2 = rng.normal(0, 0.5, (hidden, classes))
    b2 = rng.normal(0, 0.1, (classes,))
    mean = rng.normal(3.0, 2.0, width)
    std = rng.uniform(0.5, 3.0, width)

    def tail(src):
        return [
            helper.make_node("MatMul", [src, "W1"], ["m1"], name="matmul1"),
            helper.make_node("Add", ["m1", "B1"], ["h1"], name="bias1"),
            helper.make_node("Relu", ["h1"], ["a1"], name="relu1"),
            helper.make_node("MatMul", ["a1", "W2"], ["m2"], name="matmul2"),
            helper.make_node("Add", ["m2", "B2"], ["z"], name="bias2"),
            helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
        ]

    weights = [f32("W1", w1), f32("B1", b1), f32("W2", w2), f32("B2", b2)]
    params = dense_params((width, hidden), (hidden, classes))
    x = np.round(mean + std * rng.normal(0, 1, (10, width)), 3)

    nodes = [helper.make_node("Scaler", ["x"], ["xs"], name="scaler", domain="ai.onnx.ml",
                              offset=[float(v) for v in mean], scale=[float(1 / v) for v in std])] + tail("xs")
    m = model(nodes, weights, [inp("x", ["N", width])], [out("p", ["N", classes])], opset=OPSET_ML)
    save_valid(out_dir, "scaler_op", m, x, ["N", width],
               {"pattern": "ai.onnx.ml Scaler (per-feature offset/scale), MLP", "output_kind": "softmax",
                "params": params, "scaler_kind": "Standardise"})

    nodes = [helper.make_node("Scaler", ["x"], ["xs"], name="scaler", domain="ai.onnx.ml", offset=[2.5], scale=[0.5])] + tail("xs")
    m = model(nodes, weights, [inp("x", ["N", width])], [out("p", ["N", classes])], opset=OPSET_ML)
    save_valid(out_dir, "scaler_op_single", m, x, ["N", width],
               {"pattern": "ai.onnx.ml Scaler with single offset/scale values", "output_kind": "softmax",
                "params": params, "scaler_kind": "Uniform"})

    nodes = [
        helper.make_node("Sub", ["x", "mean"], ["xc"], name="center"),
        helper.make_node("Div", ["xc", "std"], ["xs"], name="scale"),
    ] + tail("xs")
    m = model(nodes, weights + [f32("mean", mean), f32("std", std.reshape(1, width))], [inp("x", ["N", width])], [out("p", ["N", classes])])
    save_valid(out_dir, "sub_div_scaler", m, x, ["N", width],
               {"pattern": "Sub(mean [n]) + Div(std [1,n]) at the input", "output_kind": "softmax",
                "params": params, "scaler_kind": "Standardise"})

    lo = mean - 2 * std
    hi = mean + 2 * std
    s = 1.0 / (hi - lo)
    nodes = [
        helper.make_node("Mul", ["x", "s"], ["xm"], name="minmax_mul"),
        helper.make_node("Add", ["xm", "b"], ["xs"], name="minmax_add"),
    ] + tail("xs")
    m = model(nodes, weights + [f32("s", s), f32("b", -lo * s)], [inp("x", ["N", width])], [out("p", ["N", classes])])
    save_valid(out_dir, "mul_add_scaler", m, x, ["N", width],
               {"pattern": "Mul(scale) + Add(min) at the input (min-max scaling)", "output_kind": "softmax",
                "params": params, "scaler_kind": "MinMax"})

    nodes = [helper.make_node("Div", ["x", "k"], ["xs"], name="div255")] + tail("xs")
    m = model(nodes, weights + [f32("k", np.float32(255.0))], [inp("x", ["N", width])], [out("p", ["N", classes])])
    save_valid(out_dir, "uniform_div_scaler", m, np.round(rng.uniform(0, 255, (10, width))), ["N", width],
               {"pattern": "Div by a scalar 255 at the input", "output_kind": "softmax", "params": params,
                "scaler_kind": "Uniform"})


def sigmoid_binary(out_dir):
    rng = np.random.default_rng(107)
    w1 = rng.normal(0, 0.5, (6, 4))
    c1 = rng.normal(0, 0.1, (6,))
    w2 = rng.normal(0, 0.8, (1, 6))
    c2 = rng.normal(0, 0.1, (1,))
    nodes = [
        helper.make_node("Gemm", ["x", "W1", "C1"], ["h"], name="fc1", transB=1),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        helper.make_node("Gemm", ["a", "W2", "C2"], ["z"], name="fc2", transB=1),
        helper.make_node("Sigmoid", ["z"], ["p"], name="sigmoid"),
    ]
    m = model(nodes, [f32("W1", w1), f32("C1", c1), f32("W2", w2), f32("C2", c2)], [inp("x", ["N", 4])], [out("p", ["N", 1])])
    save_valid(out_dir, "sigmoid_binary", m, rows(rng, 10, 4), ["N", 4],
               {"pattern": "Gemm, Relu, Gemm to one output, Sigmoid", "output_kind": "sigmoid",
                "params": dense_params((4, 6), (6, 1))})


def label_branch_strings(out_dir):
    rng = np.random.default_rng(108)
    w = rng.normal(0, 0.5, (3, 4))
    c = rng.normal(0, 0.1, (3,))
    classes = helper.make_tensor("classes", TensorProto.STRING, [3], [b"heron", b"wren", b"finch"])
    nodes = [
        helper.make_node("Gemm", ["x", "W", "C"], ["z"], name="fc", transB=1),
        helper.make_node("Softmax", ["z"], ["probabilities"], name="softmax"),
        helper.make_node("ArgMax", ["probabilities"], ["idx"], name="argmax", axis=1),
        helper.make_node("ArrayFeatureExtractor", ["classes", "idx"], ["lab"], name="afe", domain="ai.onnx.ml"),
        helper.make_node("Reshape", ["lab", "shape"], ["label"], name="reshape_label"),
    ]
    m = model(nodes, [f32("W", w), f32("C", c), classes, i64_typed("shape", [-1])], [inp("x", ["N", 4])],
              [out("label", ["N"], TensorProto.STRING), out("probabilities", ["N", 3])], opset=OPSET_ML)
    save_valid(out_dir, "label_branch_strings", m, rows(rng, 10, 4), ["N", 4],
               {"pattern": "Softmax, then ArgMax -> ArrayFeatureExtractor(string classes) -> Reshape; two outputs",
                "output_kind": "softmax", "params": dense_params((4, 3)), "labels": ["heron", "wren", "finch"]},
               output_name="probabilities")


def typed_fields(out_dir):
    rng = np.random.default_rng(109)
    w1 = rng.normal(0, 0.5, (5, 3))
    b1 = rng.normal(0, 0.1, (5,))
    w2 = rng.normal(0, 0.5, (5, 2))
    b2 = rng.normal(0, 0.1, (1, 2))
    nodes = [
        helper.make_node("Gemm", ["x", "W1", "C1"], ["h"], name="fc1", transB=1),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        helper.make_node("MatMul", ["a", "W2"], ["m"], name="matmul2"),
        helper.make_node("Add", ["m", "B2"], ["z"], name="bias2"),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
    ]
    # Weights in float_data (typed) for one layer, raw_data for the other.
    inits = [f32_typed("W1", w1), f32_typed("C1", b1), f32("W2", w2), f32_typed("B2", b2)]
    m = model(nodes, inits, [inp("x", ["N", 3])], [out("p", ["N", 2])])
    assert m.graph.initializer[0].float_data and not m.graph.initializer[0].raw_data
    assert m.graph.initializer[2].raw_data
    save_valid(out_dir, "typed_fields", m, rows(rng, 10, 3), ["N", 3],
               {"pattern": "initializers in float_data mixed with raw_data", "output_kind": "softmax",
                "params": dense_params((3, 5), (5, 2))})


def constant_nodes(out_dir):
    rng = np.random.default_rng(110)
    w1 = rng.normal(0, 0.5, (4, 6))
    b1 = rng.normal(0, 0.1, (6,))
    w2 = rng.normal(0, 0.5, (3, 6))
    b2 = rng.normal(0, 0.1, (3,))
    nodes = [
        helper.make_node("Constant", [], ["W1"], name="const_w1", value=f32("W1v", w1)),
        helper.make_node("Constant", [], ["B1"], name="const_b1", value_floats=[float(v) for v in np.float32(b1)]),
        helper.make_node("Constant", [], ["W2"], name="const_w2", value=f32_typed("W2v", w2)),
        helper.make_node("MatMul", ["x", "W1"], ["m"], name="matmul1"),
        helper.make_node("Add", ["m", "B1"], ["h"], name="bias1"),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        helper.make_node("Gemm", ["a", "W2", "C2"], ["z"], name="fc2", transB=1),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
    ]
    m = model(nodes, [f32("C2", b2)], [inp("x", ["N", 4])], [out("p", ["N", 3])])
    save_valid(out_dir, "constant_nodes", m, rows(rng, 10, 4), ["N", 4],
               {"pattern": "weights from Constant nodes (value tensor raw and typed, value_floats)",
                "output_kind": "softmax", "params": dense_params((4, 6), (6, 3))})


def exporter_forms(out_dir):
    """Built by hand with onnx.helper, mimicking exporters where no framework made the graph
    (the framework-made ones are in tests/fixtures/exporters/: make_torch_cases.py,
    make_tf_cases.py).

    tf_transposed_weight: tf2onnx's naming (values 'dense/MatMul:0', initializers
    'dense/MatMul/ReadVariableOp:0'), a Reshape whose [-1, 6] target is a Constant node cast from
    INT32 to INT64, and a Transpose applied to an initializer before MatMul. tf2onnx 1.17 with
    TensorFlow 2.21 never writes that Transpose itself (TensorFlow folds it before conversion,
    even with tf2onnx's optimizers off), so this form is hand-built."""
    rng = np.random.default_rng(120)
    w_out_in = rng.normal(0, 0.5, (4, 6))  # [out, in]: transposed in the graph
    b = rng.normal(0, 0.1, (4,))
    shape32 = helper.make_tensor("shape_i32", TensorProto.INT32, [2], [-1, 6])
    nodes = [
        helper.make_node("Constant", [], ["flatten/Const:0"], name="flatten/Const", value=shape32),
        helper.make_node("Cast", ["flatten/Const:0"], ["flatten/Reshape__7:0"], name="flatten/Reshape__7", to=TensorProto.INT64),
        helper.make_node("Reshape", ["input:0", "flatten/Reshape__7:0"], ["flatten/Reshape:0"], name="flatten/Reshape"),
        helper.make_node("Transpose", ["dense/MatMul/ReadVariableOp:0"], ["dense/MatMul/ReadVariableOp/transpose:0"],
                         name="dense/MatMul/ReadVariableOp/transpose", perm=[1, 0]),
        helper.make_node("MatMul", ["flatten/Reshape:0", "dense/MatMul/ReadVariableOp/transpose:0"], ["dense/MatMul:0"],
                         name="dense/MatMul"),
        helper.make_node("Add", ["dense/MatMul:0", "dense/BiasAdd/ReadVariableOp:0"], ["dense/BiasAdd:0"], name="dense/BiasAdd"),
        helper.make_node("Softmax", ["dense/BiasAdd:0"], ["Identity:0"], name="dense/Softmax"),
    ]
    inits = [f32("dense/MatMul/ReadVariableOp:0", w_out_in), f32("dense/BiasAdd/ReadVariableOp:0", b)]
    m = model(nodes, inits, [inp("input:0", ["unk__8", 2, 3])], [out("Identity:0", ["unk__8", 4])],
              opset=[helper.make_opsetid("", 15)])
    save_valid(out_dir, "tf_transposed_weight", m, rows(rng, 10, 6), ["N", 2, 3],
               {"pattern": "hand-built tf2onnx form: Constant INT32 shape + Cast, Reshape [-1, 6], Transpose of an initializer, MatMul + Add",
                "output_kind": "softmax", "params": dense_params((6, 4))})

    # Refused (docs/bad-inputs.md C115-C119).
    w = f32("W", rng.normal(0, 0.5, (4, 3)))
    # C115: a constant that is no pure function of constants (RandomNormal draws at run time).
    nodes = [
        helper.make_node("RandomNormal", [], ["noise"], name="noise_bias", shape=[4], seed=1.0),
        helper.make_node("Gemm", ["x", "W", "noise"], ["p"], name="fc1", transB=1),
    ]
    write(out_dir, "bad_constant_not_folded", model(nodes, [w], [inp("x", ["N", 3])], [out("p", ["N", 4])]))
    # C116: a weight cast to FLOAT16 (its rounding is not folded).
    nodes = [
        helper.make_node("Cast", ["W"], ["W16"], name="weight_fp16", to=TensorProto.FLOAT16),
        helper.make_node("Gemm", ["x", "W16"], ["p"], name="fc1", transB=1),
    ]
    write(out_dir, "bad_fold_cast_fp16", model(nodes, [w], [inp("x", ["N", 3])], [out("p", ["N", 4])]))

    def view(tail_nodes, target, dims):
        """Reshape(x, target) after a shape computation; then Gemm over 6 features."""
        nodes = [helper.make_node("Shape", ["x"], ["s"], name="shape"),
                 helper.make_node("Constant", [], ["zero"], name="zero", value=helper.make_tensor("z", TensorProto.INT64, [], [0])),
                 helper.make_node("Gather", ["s", "zero"], ["n"], name="batch"),
                 *tail_nodes,
                 helper.make_node("Reshape", ["x", target], ["xf"], name="flatten"),
                 helper.make_node("Gemm", ["xf", "W6"], ["p"], name="fc1", transB=1)]
        inits = [f32("W6", rng.normal(0, 0.5, (4, 6))), i64_typed("minus1", [-1]), i64_typed("ax0", [0])]
        return model(nodes, inits, [inp("x", dims)], [out("p", ["N", 4])])

    # C117: arithmetic on the batch size (x.view(2 * x.size(0), -1)).
    two = helper.make_tensor("two", TensorProto.INT64, [], [2])
    write(out_dir, "bad_shape_arith", view([
        helper.make_node("Constant", [], ["c2"], name="c2", value=two),
        helper.make_node("Mul", ["n", "c2"], ["n2"], name="double_batch"),
        helper.make_node("Unsqueeze", ["n2", "ax0"], ["n2u"], name="unsq"),
        helper.make_node("Concat", ["n2u", "minus1"], ["t"], name="target", axis=0)], "t", ["N", 2, 3]))
    # C118: the batch size last in the target (x.view(-1, x.size(0))).
    write(out_dir, "bad_shape_batch_last", view([
        helper.make_node("Unsqueeze", ["n", "ax0"], ["nu"], name="unsq"),
        helper.make_node("Concat", ["minus1", "nu"], ["t"], name="target", axis=0)], "t", ["N", 2, 3]))
    # C119: a shape computation over dims the input does not declare.
    write(out_dir, "bad_shape_unknown_dim", view([
        helper.make_node("Unsqueeze", ["n", "ax0"], ["nu"], name="unsq"),
        helper.make_node("Concat", ["nu", "minus1"], ["t"], name="target", axis=0)], "t", ["N", "H", "W"]))


def image_models(out_dir):
    """784-100-10 with Flatten + Gemm(transB=1), its MatMul + Add twin, and 784 -> 10."""
    rng = np.random.default_rng(784)
    w1 = (rng.normal(0, 1, (100, 784)) * 0.05).astype(np.float32)  # [out, in]
    b1 = (rng.normal(0, 1, (100,)) * 0.05).astype(np.float32)
    w2 = (rng.normal(0, 1, (10, 100)) * 0.05).astype(np.float32)
    b2 = (rng.normal(0, 1, (10,)) * 0.05).astype(np.float32)
    x = np.round(rng.uniform(0, 1, (20, 784)), 2)
    shape = ["N", 1, 28, 28]
    meta = {"output_kind": "softmax", "params": dense_params((784, 100), (100, 10))}

    nodes = [
        helper.make_node("Flatten", ["x"], ["xf"], name="flatten"),
        helper.make_node("Gemm", ["xf", "W1", "B1"], ["h"], name="fc1", transB=1),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        helper.make_node("Gemm", ["a", "W2", "B2"], ["z"], name="fc2", transB=1),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
    ]
    m = model(nodes, [f32("W1", w1), f32("B1", b1), f32("W2", w2), f32("B2", b2)], [inp("x", shape)], [out("p", ["N", 10])])
    y_gemm = save_valid(out_dir, "mlp_784_100_10_gemm", m, x, shape,
                        dict(meta, pattern="Flatten, Gemm(transB=1), Relu, Gemm(transB=1), Softmax"))

    nodes = [
        helper.make_node("Reshape", ["x", "shape"], ["xf"], name="reshape"),
        helper.make_node("MatMul", ["xf", "W1t"], ["m1"], name="matmul1"),
        helper.make_node("Add", ["m1", "B1"], ["h"], name="bias1"),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        helper.make_node("MatMul", ["a", "W2t"], ["m2"], name="matmul2"),
        helper.make_node("Add", ["m2", "B2"], ["z"], name="bias2"),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
    ]
    inits = [numpy_helper.from_array(np.array([-1, 784], dtype=np.int64), "shape"),
             f32("W1t", w1.T), f32("B1", b1), f32("W2t", w2.T), f32("B2", b2)]
    m = model(nodes, inits, [inp("x", shape)], [out("p", ["N", 10])])
    y_mm = save_valid(out_dir, "mlp_784_100_10_matmul", m, x, shape,
                      dict(meta, pattern="Reshape, MatMul + Add, Relu, MatMul + Add, Softmax (same weights as the Gemm twin)"))
    assert np.allclose(y_gemm, y_mm, atol=1e-6)

    w = (rng.normal(0, 1, (10, 784)) * 0.05).astype(np.float32)
    b = (rng.normal(0, 1, (10,)) * 0.05).astype(np.float32)
    nodes = [
        helper.make_node("Gemm", ["x", "W", "B"], ["z"], name="fc", transB=1),
        helper.make_node("Softmax", ["z"], ["p"], name="softmax"),
    ]
    m = model(nodes, [f32("W", w), f32("B", b)], [inp("x", ["N", 784])], [out("p", ["N", 10])])
    save_valid(out_dir, "single_784_10", m, np.round(rng.uniform(0, 1, (20, 784)), 2), ["N", 784],
               {"pattern": "Gemm(transB=1) 784 -> 10, Softmax", "output_kind": "softmax",
                "params": dense_params((784, 10))})


# ----------------------------------------------------------------------------------------------
# scikit-learn pipelines exported by skl2onnx.


def stable(m, name):
    """Makes an skl2onnx export reproducible: its graph name is a random UUID and the order of
    its opset imports follows Python's (randomised) string hashing."""
    m.graph.name = name
    m.producer_version = skl2onnx.__version__
    ops = sorted(m.opset_import, key=lambda o: o.domain)
    del m.opset_import[:]
    m.opset_import.extend(ops)


def sklearn_pipelines(out_dir):
    from sklearn.datasets import load_breast_cancer, load_digits, load_iris
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import MinMaxScaler, StandardScaler
    from skl2onnx import convert_sklearn
    from skl2onnx.common.data_types import FloatTensorType

    cases = [
        ("sk_digits_standard_mlp", load_digits, StandardScaler, "Standardise", (16,)),
        ("sk_iris_minmax_mlp", load_iris, MinMaxScaler, "MinMax", (16,)),
        ("sk_breast_cancer_binary_mlp", load_breast_cancer, StandardScaler, "Standardise", (16,)),
    ]
    for name, loader, scaler_cls, kind, hidden in cases:
        data = loader()
        # Fit and evaluate on float32 values, as the ONNX model sees them.
        X = data.data.astype(np.float32).astype(np.float64)
        y = data.target
        clf = MLPClassifier(hidden_layer_sizes=hidden, max_iter=50, random_state=0)
        pipe = make_pipeline(scaler_cls(), clf)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            pipe.fit(X, y)
        m = convert_sklearn(pipe, initial_types=[("input", FloatTensorType([None, X.shape[1]]))],
                            options={id(clf): {"zipmap": False}}, target_opset={"": 15, "ai.onnx.ml": 1})
        stable(m, name)
        pick = np.linspace(0, X.shape[0] - 1, 10).astype(int)
        x = data.data[pick]
        shapes = [c.shape for c in clf.coefs_]
        meta = {
            "pattern": f"skl2onnx export of {scaler_cls.__name__} + MLPClassifier{hidden} on {loader.__name__}",
            "output_kind": "sigmoid" if len(clf.classes_) == 2 else "softmax",
            "params": dense_params(*shapes),
            "scaler_kind": kind,
            "labels": [str(c) for c in clf.classes_],
            "sklearn": {
                "source": f"scikit-learn {sklearn.__version__} Pipeline.predict_proba",
                "rows": pipe.predict_proba(x.astype(np.float32).astype(np.float64)).tolist(),
            },
        }
        y_ref = save_valid(out_dir, name, m, x, [None, X.shape[1]], meta, output_name="probabilities")
        gap = float(np.max(np.abs(y_ref - np.asarray(meta["sklearn"]["rows"]))))
        print(f"{name}: ReferenceEvaluator vs predict_proba max |diff| = {gap:.2e}")
        if loader is load_iris:
            # The default export (ZipMap on) gives probabilities as a list of dictionaries:
            # kept as a malformed case, the importer must say how to export instead.
            z = convert_sklearn(pipe, initial_types=[("input", FloatTensorType([None, X.shape[1]]))],
                                target_opset={"": 15, "ai.onnx.ml": 1})
            stable(z, "zipmap")
            write(out_dir, "bad_sk_zipmap", z)


# ----------------------------------------------------------------------------------------------
# Malformed models.


def malformed(out_dir):
    rng = np.random.default_rng(111)
    w = f32("W", rng.normal(0, 0.5, (4, 3)))
    c = f32("C", np.zeros(4))

    nodes = [
        helper.make_node("Conv", ["x", "K"], ["y"], name="conv1", kernel_shape=[3, 3]),
        helper.make_node("Flatten", ["y"], ["yf"], name="flatten"),
        helper.make_node("Gemm", ["yf", "W4", "C"], ["p"], name="fc", transB=1),
    ]
    m = model(nodes, [f32("K", rng.normal(0, 1, (1, 1, 3, 3))), f32("W4", rng.normal(0, 1, (4, 4))), c],
              [inp("x", ["N", 1, 4, 4])], [out("p", ["N", 4])])
    write(out_dir, "bad_conv", m)

    nodes = [
        helper.make_node("Gemm", ["x", "W", "C"], ["h"], name="fc1", transB=1),
        helper.make_node("ThresholdedRelu", ["h"], ["a"], name="thresholded1"),
        helper.make_node("Gemm", ["a", "W2", "C2"], ["p"], name="fc2", transB=1),
    ]
    m = model(nodes, [w, c, f32("W2", rng.normal(0, 1, (2, 4))), f32("C2", np.zeros(2))], [inp("x", ["N", 3])], [out("p", ["N", 2])])
    write(out_dir, "bad_thresholded_relu", m)

    nodes = [
        helper.make_node("Gemm", ["x", "W", "C"], ["h"], name="fc1", transB=1),
        helper.make_node("Relu", ["h"], ["a"], name="relu1"),
        helper.make_node("Gemm", ["a", "W2", "C2"], ["p"], name="fc2", transB=1),
    ]
    m = model(nodes, [w, c, f32("W2", rng.normal(0, 1, (2, 5))), f32("C2", np.zeros(2))], [inp("x", ["N", 3])], [out("p", ["N", 2])])
    write(out_dir, "bad_shape_mismatch", m)

    nodes = [
        helper.make_node("Add", ["x", "x2"], ["s"], name="add_inputs"),
        helper.make_node("Gemm", ["s", "W", "C"], ["p"], name="fc1", transB=1),
    ]
    m = model(nodes, [w, c], [inp("x", ["N", 3]), inp("x2", ["N", 3])], [out("p", ["N", 4])])
    write(out_dir, "bad_two_inputs", m)

    bad = rng.normal(0, 0.5, (4, 3)).astype(np.float32)
    bad[2, 1] = np.nan
    nodes = [helper.make_node("Gemm", ["x", "Wnan", "C"], ["p"], name="fc_nan", transB=1)]
    m = model(nodes, [f32("Wnan", bad), c], [inp("x", ["N", 3])], [out("p", ["N", 4])])
    write(out_dir, "bad_nan_weight", m)

    nodes = [
        helper.make_node("Add", ["x", "loop"], ["s"], name="add_loop"),
        helper.make_node("Gemm", ["s", "W3", "C3"], ["loop"], name="fc_loop", transB=1),
    ]
    m = model(nodes, [f32("W3", rng.normal(0, 1, (3, 3))), f32("C3", np.zeros(3))], [inp("x", ["N", 3])], [out("loop", ["N", 3])])
    write(out_dir, "bad_cycle", m)

    nodes = [
        helper.make_node("Gemm", ["x", "W", "C"], ["p"], name="fc1", transB=1),
        helper.make_node("Relu", ["W"], ["stray"], name="stray_relu"),
    ]
    m = model(nodes, [w, c], [inp("x", ["N", 3])], [out("p", ["N", 4])])
    write(out_dir, "bad_disconnected", m)

    nodes = [
        helper.make_node("Gemm", ["x", "W", "C"], ["z"], name="fc1", transB=1),
        helper.make_node("Sigmoid", ["z"], ["p"], name="sigmoid_multi"),
    ]
    m = model(nodes, [w, c], [inp("x", ["N", 3])], [out("p", ["N", 4])])
    write(out_dir, "bad_sigmoid_multi", m)

    nodes = [
        helper.make_node("Gemm", ["x", "W", "C"], ["p"], name="fc_transa", transA=1, transB=1),
    ]
    m = model(nodes, [w, c], [inp("x", ["N", 3])], [out("p", ["N", 4])])
    write(out_dir, "bad_trans_a", m)

    nodes = [
        helper.make_node("Mul", ["x", "zero"], ["xm"], name="mul_zero"),
        helper.make_node("Add", ["xm", "one"], ["xs"], name="add_one"),
        helper.make_node("Gemm", ["xs", "W", "C"], ["p"], name="fc1", transB=1),
    ]
    m = model(nodes, [w, c, f32("zero", [1.0, 0.0, 1.0]), f32("one", [1.0, 1.0, 1.0])], [inp("x", ["N", 3])], [out("p", ["N", 4])])
    write(out_dir, "bad_zero_scale", m)

    m = model([], [w], [inp("x", ["N", 3])], [out("x", ["N", 3])])
    write(out_dir, "bad_empty_graph", m)

    good = (out_dir / "gemm_transb_alpha_beta.onnx").read_bytes()
    (out_dir / "bad_truncated.onnx").write_bytes(good[: len(good) // 2])


def main():
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).resolve().parents[1] / "fixtures" / "onnx"
    out_dir.mkdir(parents=True, exist_ok=True)
    gemm_alpha_beta(out_dir)
    matmul_add_row_bias(out_dir)
    batchnorm_fold(out_dir)
    noop_removal(out_dir)
    flatten_and_reshape(out_dir)
    scalers(out_dir)
    sigmoid_binary(out_dir)
    label_branch_strings(out_dir)
    typed_fields(out_dir)
    constant_nodes(out_dir)
    exporter_forms(out_dir)
    image_models(out_dir)
    sklearn_pipelines(out_dir)
    malformed(out_dir)
    print(f"wrote {len(list(out_dir.glob('*.onnx')))} models to {out_dir}")


if __name__ == "__main__":
    main()
