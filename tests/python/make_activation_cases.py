#!/usr/bin/env python3
"""Builds the pointwise-activation fixtures under tests/fixtures/activation/ (or the directory given).

1. MLP cases (mlp_*.onnx/.json): scikit-learn MLPClassifier with activation="tanh" or "logistic"
   (optionally behind a StandardScaler) trained on a scikit-learn bundled dataset with a stratified
   25 % held-out split (train_test_split, random_state=0), exported with skl2onnx (no ZipMap). The
   JSON holds the held-out rows and labels, calibration rows (training rows), scikit-learn's
   predict_proba and the export's output under onnx.reference.ReferenceEvaluator, in the layout of
   make_linear_cases.py.
   Datasets: load_iris (Fisher 1936), load_wine (UCI Wine), load_breast_cancer (UCI Breast Cancer
   Wisconsin, diagnostic), load_digits (UCI Optical Recognition of Handwritten Digits).
2. Op cases (op_*.onnx/.json): graphs built with onnx.helper, Gemm -> OP -> Gemm -> Softmax, with
   seeded random weights, for each pointwise op the converter imports (and the decomposed Gelu an
   exporter writes for opsets before 20: Div, Erf, Add, Mul, Mul). The JSON holds the rows and the
   ReferenceEvaluator output.
3. tables.json: int8 activation tables computed with numpy in float64 (np.tanh, np.exp, np.log1p,
   and math.erf for Gelu), q_out = clip(round_half_even(f((q - zp_in) * s_in) / s_out) + zp_out),
   for q = -128..127, with the unrounded value f(x) / s_out + zp_out beside each entry, so the Rust
   test can tell a rounding-boundary case from a wrong entry.

Run with the reference venv:  .venv/bin/python tests/python/make_activation_cases.py [OUT_DIR]
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import json  # noqa: E402
import math  # noqa: E402
import sys  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import onnx  # noqa: E402
from onnx import TensorProto, helper, numpy_helper  # noqa: E402
from onnx.reference import ReferenceEvaluator  # noqa: E402
from sklearn.datasets import load_breast_cancer, load_digits, load_iris, load_wine  # noqa: E402
from sklearn.exceptions import ConvergenceWarning  # noqa: E402
from sklearn.neural_network import MLPClassifier  # noqa: E402
from sklearn.pipeline import Pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from make_linear_cases import (  # noqa: E402
    CALIBRATION_ROWS, REF_SOURCE, SK, export, f32_list, g9_list, save, split,
)


def mlp_cases(out_dir):
    cases = [
        # name, loader, scaler, activation, hidden, output kind
        ("mlp_tanh_iris", load_iris, None, "tanh", (8,), "softmax"),
        ("mlp_logistic_iris", load_iris, None, "logistic", (8,), "softmax"),
        ("mlp_tanh_wine_standard", load_wine, StandardScaler(), "tanh", (16,), "softmax"),
        ("mlp_logistic_wine_standard", load_wine, StandardScaler(), "logistic", (16,), "softmax"),
        ("mlp_tanh_breast_cancer_standard", load_breast_cancer, StandardScaler(), "tanh", (16,), "sigmoid"),
        ("mlp_logistic_breast_cancer_standard", load_breast_cancer, StandardScaler(), "logistic", (16,), "sigmoid"),
        ("mlp_tanh_digits", load_digits, None, "tanh", (32, 16), "softmax"),
        ("mlp_logistic_digits", load_digits, None, "logistic", (32,), "softmax"),
    ]
    for name, loader, scaler, act, hidden, kind in cases:
        X_train, X_test, y_train, y_test = split(loader)
        clf = MLPClassifier(hidden_layer_sizes=hidden, activation=act, max_iter=2000, random_state=0)
        est = Pipeline([("scaler", scaler), ("clf", clf)]) if scaler is not None else clf
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            est.fit(X_train, y_train)
        m = export(est, X_train.shape[1], name, {id(clf): {"zipmap": False}})
        n_params = sum(int(w.size) for w in clf.coefs_) + sum(int(b.size) for b in clf.intercepts_)
        meta = {
            "pattern": f"skl2onnx export of {'StandardScaler + ' if scaler is not None else ''}MLPClassifier(activation={act!r}, hidden_layer_sizes={hidden}) on {loader.__name__}",
            "dataset": loader.__name__,
            "activation": act,
            "output_kind": kind,
            "params": n_params,
            "scaler_kind": "Standardise" if scaler is not None else None,
            "labels": [str(c) for c in clf.classes_],
            "sklearn_accuracy": float(est.score(X_test, y_test)),
        }
        save(out_dir, name, m, meta, X_test, y_test, X_train, est.predict_proba(X_test), f"{SK} MLPClassifier.predict_proba")


def op_graph(name, op_nodes, opset, hidden=6, width=4, classes=3, seed=0):
    """input [N, width] -> Gemm -> (op_nodes from 'h' to 'a') -> Gemm -> Softmax."""
    rng = np.random.default_rng(seed)
    w1 = rng.normal(0, 1.0, (width, hidden)).astype(np.float32)
    b1 = rng.normal(0, 0.5, hidden).astype(np.float32)
    w2 = rng.normal(0, 1.0, (hidden, classes)).astype(np.float32)
    b2 = rng.normal(0, 0.5, classes).astype(np.float32)
    inits = [numpy_helper.from_array(w1, "w1"), numpy_helper.from_array(b1, "b1"),
             numpy_helper.from_array(w2, "w2"), numpy_helper.from_array(b2, "b2")]
    nodes = [helper.make_node("Gemm", ["input", "w1", "b1"], ["h"], name="dense1")]
    extra = []
    for n in op_nodes:
        if isinstance(n, onnx.TensorProto):
            extra.append(n)
        else:
            nodes.append(n)
    nodes += [helper.make_node("Gemm", ["a", "w2", "b2"], ["logits"], name="dense2"),
              helper.make_node("Softmax", ["logits"], ["probabilities"], name="softmax", axis=1)]
    g = helper.make_graph(nodes, name, [helper.make_tensor_value_info("input", TensorProto.FLOAT, [None, width])],
                          [helper.make_tensor_value_info("probabilities", TensorProto.FLOAT, [None, classes])],
                          initializer=inits + extra)
    m = helper.make_model(g, opset_imports=[helper.make_opsetid("", opset)], producer_name="kinglet-tests")
    m.ir_version = 9
    onnx.checker.check_model(m)
    return m


def scalar(name, v):
    return numpy_helper.from_array(np.array(v, dtype=np.float32), name)


def op_cases(out_dir):
    n = helper.make_node
    cases = [
        ("op_leaky_relu", [n("LeakyRelu", ["h"], ["a"], name="act", alpha=0.1)], 13),
        ("op_leaky_relu_default", [n("LeakyRelu", ["h"], ["a"], name="act")], 13),
        ("op_relu6_clip13", [n("Clip", ["h", "lo", "hi"], ["a"], name="act"), scalar("lo", 0.0), scalar("hi", 6.0)], 13),
        ("op_clip13_bounds", [n("Clip", ["h", "lo", "hi"], ["a"], name="act"), scalar("lo", -0.5), scalar("hi", 1.25)], 13),
        ("op_clip13_max_only", [n("Clip", ["h", "", "hi"], ["a"], name="act"), scalar("hi", 0.75)], 13),
        ("op_clip6_attributes", [n("Clip", ["h"], ["a"], name="act", min=-1.0, max=1.0)], 10),
        ("op_hard_sigmoid", [n("HardSigmoid", ["h"], ["a"], name="act", alpha=0.25, beta=0.4)], 13),
        ("op_hard_swish", [n("HardSwish", ["h"], ["a"], name="act")], 14),
        ("op_elu", [n("Elu", ["h"], ["a"], name="act", alpha=0.7)], 13),
        ("op_selu", [n("Selu", ["h"], ["a"], name="act")], 13),
        ("op_softplus", [n("Softplus", ["h"], ["a"], name="act")], 13),
        ("op_tanh", [n("Tanh", ["h"], ["a"], name="act")], 13),
        ("op_sigmoid_hidden", [n("Sigmoid", ["h"], ["a"], name="act")], 13),
        ("op_gelu20", [n("Gelu", ["h"], ["a"], name="act")], 20),
        ("op_gelu20_tanh", [n("Gelu", ["h"], ["a"], name="act", approximate="tanh")], 20),
        # x * 0.5 * (1 + erf(x / sqrt(2))), as PyTorch's exporter writes nn.GELU before opset 20.
        ("op_gelu_decomposed", [
            n("Div", ["h", "sqrt2"], ["d"], name="gelu_div"), n("Erf", ["d"], ["e"], name="gelu_erf"),
            n("Add", ["e", "one"], ["p"], name="gelu_add"), n("Mul", ["h", "p"], ["m"], name="gelu_mul"),
            n("Mul", ["m", "half"], ["a"], name="gelu_half"),
            scalar("sqrt2", 1.4142135381698608), scalar("one", 1.0), scalar("half", 0.5)], 13),
    ]
    rng = np.random.default_rng(7)
    x = (rng.normal(0, 1.5, (64, 4))).astype(np.float32)
    cal = (rng.normal(0, 1.5, (200, 4))).astype(np.float32)
    for name, nodes, opset in cases:
        m = op_graph(name, nodes, opset)
        (out_dir / f"{name}.onnx").write_bytes(m.SerializeToString())
        y = ReferenceEvaluator(m).run(None, {"input": x})[0]
        doc = {"pattern": f"onnx.helper graph Gemm -> {name[3:]} -> Gemm -> Softmax, opset {opset}",
               "model": f"{name}.onnx", "heldout": f32_list(x), "calibration": f32_list(cal),
               "expected": {"source": REF_SOURCE, "output": "probabilities", "rows": g9_list(y)}}
        (out_dir / f"{name}.json").write_text(json.dumps(doc, separators=(",", ":")) + "\n")
        print(f"{name}: {len(x)} rows")


def np_fn(kind, a, b):
    erf = np.vectorize(math.erf)
    return {
        "tanh": np.tanh,
        "sigmoid": lambda x: 1.0 / (1.0 + np.exp(-x)),
        "leaky_relu": lambda x: np.where(x >= 0, x, a * x),
        "clip": lambda x: np.clip(x, a, b),
        "hard_sigmoid": lambda x: np.clip(a * x + b, 0.0, 1.0),
        "hard_swish": lambda x: x * np.clip(x / 6.0 + 0.5, 0.0, 1.0),
        "elu": lambda x: np.where(x >= 0, x, a * np.expm1(x)),
        "selu": lambda x: np.where(x > 0, b * x, b * a * np.expm1(x)),
        "softplus": lambda x: np.log1p(np.exp(x)),
        "gelu": lambda x: 0.5 * x * (1.0 + erf(x / math.sqrt(2.0))),
        "gelu_tanh": lambda x: 0.5 * x * (1.0 + np.tanh(math.sqrt(2.0 / math.pi) * (x + 0.044715 * x ** 3))),
    }[kind]


def table_cases(out_dir):
    # kind, a, b, (input scale, zero point), (output scale, zero point)
    cases = [
        ("tanh", 0, 0, (0.03, -5), (2 / 255, 0)),
        ("tanh", 0, 0, (0.1, 20), (1.9 / 255, -3)),
        ("sigmoid", 0, 0, (0.05, 0), (1 / 255, -128)),
        ("leaky_relu", 0.1, 0, (0.02, -30), (0.012, -100)),
        ("clip", 0, 6, (0.04, 0), (6 / 255, -128)),
        ("hard_sigmoid", 0.2, 0.5, (0.05, 10), (1 / 255, -128)),
        ("hard_swish", 0, 0, (0.05, 0), (0.03, -100)),
        ("elu", 1.0, 0, (0.03, 10), (0.02, -80)),
        ("selu", 1.6732632423543772, 1.0507009873554805, (0.03, 0), (0.025, -60)),
        ("softplus", 0, 0, (0.04, 0), (0.025, -128)),
        ("gelu", 0, 0, (0.03, 0), (0.016, -118)),
        ("gelu_tanh", 0, 0, (0.03, 0), (0.016, -118)),
    ]
    out = []
    q = np.arange(-128, 128)
    for kind, a, b, (s_in, zp_in), (s_out, zp_out) in cases:
        s_in32, s_out32 = float(np.float32(s_in)), float(np.float32(s_out))
        x = ((q - zp_in).astype(np.float32) * np.float32(s_in32)).astype(np.float64)
        y = np_fn(kind, float(np.float32(a)), float(np.float32(b)))(x)
        real = y / s_out32 + zp_out
        table = np.clip(np.rint(real), -128, 127).astype(int)
        out.append({"kind": kind, "params": [float(np.float32(a)), float(np.float32(b))],
                    "input": [s_in32, zp_in], "output": [s_out32, zp_out],
                    "table": [int(v) for v in table], "unrounded": [float(f"{v:.9g}") for v in real]})
    doc = {"source": f"numpy {np.__version__} (float64; math.erf for Gelu)", "cases": out}
    (out_dir / "tables.json").write_text(json.dumps(doc, separators=(",", ":")) + "\n")
    print(f"tables.json: {len(out)} tables")


def main():
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).resolve().parents[1] / "fixtures" / "activation"
    out_dir.mkdir(parents=True, exist_ok=True)
    mlp_cases(out_dir)
    op_cases(out_dir)
    table_cases(out_dir)
    print(f"wrote {len(list(out_dir.glob('*.onnx')))} models to {out_dir}")


if __name__ == "__main__":
    main()
