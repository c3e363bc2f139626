#!/usr/bin/env python3
"""Builds the linear-classifier fixtures under tests/fixtures/linear/ (or the directory given).

Each case is a scikit-learn linear classifier (optionally behind a StandardScaler or MinMaxScaler)
trained on a scikit-learn bundled dataset with a stratified 25 % held-out split
(train_test_split, random_state=0), exported with skl2onnx (no ZipMap). For each it writes:

  NAME.onnx  the export
  NAME.json  the held-out rows and their labels, calibration rows (training rows), and two
             references for the held-out rows: scikit-learn's own output (predict_proba, or
             decision_function for models without probabilities) and the export's output under
             onnx.reference.ReferenceEvaluator

`linear_svc_digits` stores no rows: they are those of `lr_digits_minmax` ("inputs_from").
The 784-input case (`lr_pixels784_div255`) stores no rows either: its inputs are the held-out rows of
`lr_digits_minmax` (load_digits, 8x8 pixels 0..16) enlarged to 28x28 by nearest neighbour and
stretched to 0..255, by the integer formula in `pixels784` (tests/tests/linear_models.rs computes
the same), then divided by 255 inside the graph (a Div node in front of the export).

Datasets: load_iris (Fisher 1936), load_wine (UCI Wine), load_breast_cancer (UCI Breast Cancer
Wisconsin, diagnostic), load_digits (UCI Optical Recognition of Handwritten Digits).

Run with the reference venv:  .venv/bin/python tests/python/make_linear_cases.py [OUT_DIR]
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import json  # noqa: E402
import sys  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import onnx  # noqa: E402
import skl2onnx  # noqa: E402
import sklearn  # noqa: E402
from onnx import helper, numpy_helper  # noqa: E402
from onnx.reference import ReferenceEvaluator  # noqa: E402
from skl2onnx import convert_sklearn  # noqa: E402
from skl2onnx.common.data_types import FloatTensorType  # noqa: E402
from sklearn.datasets import load_breast_cancer, load_digits, load_iris, load_wine  # noqa: E402
from sklearn.exceptions import ConvergenceWarning  # noqa: E402
from sklearn.linear_model import LogisticRegression, SGDClassifier  # noqa: E402
from sklearn.model_selection import train_test_split  # noqa: E402
from sklearn.multiclass import OneVsRestClassifier  # noqa: E402
from sklearn.pipeline import Pipeline  # noqa: E402
from sklearn.preprocessing import MinMaxScaler, StandardScaler  # noqa: E402
from sklearn.svm import LinearSVC  # noqa: E402

REF_SOURCE = f"onnx.reference.ReferenceEvaluator (onnx {onnx.__version__})"
SK = f"scikit-learn {sklearn.__version__}"
OPSET = {"": 15, "ai.onnx.ml": 1}
CALIBRATION_ROWS = 300


def f32_list(a):
    """Float32 values as the shortest decimal that reads back to the same float32."""
    return [[float(np.format_float_positional(np.float32(v), unique=True, trim="-")) for v in r] for r in a]


def g9_list(a):
    """Float64 values to 9 significant digits (a relative change below 1e-8: far inside the
    1e-5 the tests allow), to keep the files small."""
    return [[float(f"{v:.9g}") for v in r] for r in np.asarray(a, dtype=np.float64)]


def stable(m, name):
    """Reproducible export: skl2onnx names the graph with a random UUID and orders opset
    imports by Python's (randomised) string hashing."""
    m.graph.name = name
    m.producer_version = skl2onnx.__version__
    ops = sorted(m.opset_import, key=lambda o: o.domain)
    del m.opset_import[:]
    m.opset_import.extend(ops)


def split(loader):
    d = loader()
    X = d.data.astype(np.float32)
    y = d.target.astype(np.int64)
    return train_test_split(X, y, test_size=0.25, random_state=0, stratify=y)


def export(est, width, name, options=None):
    m = convert_sklearn(est, initial_types=[("input", FloatTensorType([None, width]))],
                        options=options, target_opset=OPSET)
    stable(m, name)
    return m


def reference(m, x):
    ref = ReferenceEvaluator(m)
    names = [o.name for o in m.graph.output]
    out = ref.run(None, {m.graph.input[0].name: x.astype(np.float32)})
    y = np.asarray(out[names.index("probabilities")], dtype=np.float32)
    return y.reshape(y.shape[0], -1)


def params(m_coef, m_intercept):
    return int(np.asarray(m_coef).size + np.asarray(m_intercept).size)


def save(out_dir, name, m, meta, x_test, y_test, x_cal, sk_rows, sk_source, store_rows=True):
    onnx.checker.check_model(m)
    ref = reference(m, x_test)
    sk = np.asarray(sk_rows, dtype=np.float64).reshape(len(x_test), -1)
    # A binary raw-score export may give both scores [-s, s] where scikit-learn gives s.
    same = ref[:, -1:] if ref.shape[1] == 2 and sk.shape[1] == 1 else ref
    gap = float(np.max(np.abs(same.astype(np.float64) - sk)))
    (out_dir / f"{name}.onnx").write_bytes(m.SerializeToString())
    doc = dict(meta)
    doc.update({
        "model": f"{name}.onnx",
        "heldout_labels": [int(v) for v in y_test],
        "sklearn": {"source": sk_source, "rows": g9_list(sk)},
        "expected": {"source": REF_SOURCE, "output": "probabilities", "rows": g9_list(ref)},
    })
    if store_rows:
        doc["heldout"] = f32_list(x_test)
        doc["calibration"] = f32_list(x_cal[:CALIBRATION_ROWS])
    (out_dir / f"{name}.json").write_text(json.dumps(doc, separators=(",", ":")) + "\n")
    print(f"{name}: {len(x_test)} held-out rows; ReferenceEvaluator vs {sk_source.split()[-1]} max |diff| = {gap:.2e}")


def pipeline(scaler, clf):
    return Pipeline([("scaler", scaler), ("clf", clf)]) if scaler is not None else clf


def fit_quiet(est, X, y):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return est.fit(X, y)


def scaler_kind(scaler):
    return {StandardScaler: "Standardise", MinMaxScaler: "MinMax", type(None): None}[type(scaler)]


def standard_cases(out_dir):
    """Estimators skl2onnx exports directly, each with its own held-out check."""
    cases = [
        # name, loader, scaler, estimator, output kind, what scikit-learn reports
        ("lr_iris_multinomial", load_iris, None, LogisticRegression(max_iter=1000), "softmax", "predict_proba"),
        ("lr_wine_standard", load_wine, StandardScaler(), LogisticRegression(max_iter=1000), "softmax", "predict_proba"),
        ("lr_breast_cancer_standard", load_breast_cancer, StandardScaler(), LogisticRegression(max_iter=1000), "sigmoid", "predict_proba"),
        ("lr_digits_minmax", load_digits, MinMaxScaler(), LogisticRegression(max_iter=2000), "softmax", "predict_proba"),
        ("sgd_iris_hinge_standard", load_iris, StandardScaler(), SGDClassifier(random_state=0), "logits", "decision_function"),
        ("sgd_breast_cancer_hinge_standard", load_breast_cancer, StandardScaler(), SGDClassifier(random_state=0), "logits", "decision_function"),
        ("sgd_breast_cancer_log_minmax", load_breast_cancer, MinMaxScaler(), SGDClassifier(loss="log_loss", random_state=0), "sigmoid", "predict_proba"),
        ("linear_svc_wine_standard", load_wine, StandardScaler(), LinearSVC(random_state=0), "logits", "decision_function"),
        ("linear_svc_breast_cancer_minmax", load_breast_cancer, MinMaxScaler(), LinearSVC(random_state=0), "logits", "decision_function"),
        ("linear_svc_digits", load_digits, None, LinearSVC(random_state=0, max_iter=5000), "logits", "decision_function"),
    ]
    for name, loader, scaler, clf, kind, method in cases:
        X_train, X_test, y_train, y_test = split(loader)
        est = fit_quiet(pipeline(scaler, clf), X_train, y_train)
        # LinearSVC has no ZipMap option (and no probabilities); an empty entry keeps skl2onnx from
        # adding one for the pipeline.
        opts = {id(clf): {}} if isinstance(clf, LinearSVC) else {id(clf): {"zipmap": False}}
        m = export(est, X_train.shape[1], name, opts)
        sk = getattr(est, method)(X_test)
        # The two digits cases share their rows: the second one names the first.
        shared = name == "linear_svc_digits"
        meta = {
            "pattern": f"skl2onnx export of {type(scaler).__name__ + ' + ' if scaler is not None else ''}{type(clf).__name__} on {loader.__name__}",
            "dataset": loader.__name__,
            "output_kind": kind,
            "params": params(clf.coef_, clf.intercept_),
            "scaler_kind": scaler_kind(scaler),
            "labels": [str(c) for c in clf.classes_],
        }
        if shared:
            meta["inputs_from"] = "lr_digits_minmax"
        save(out_dir, name, m, meta, X_test, y_test, X_train, sk, f"{SK} {type(est).__name__}.{method}",
             store_rows=not shared)


def one_vs_rest_case(out_dir):
    """One-vs-rest logistic regression: a OneVsRestClassifier of binary LogisticRegression
    models, written in the form skl2onnx's LogisticRegression converter gives a model with
    multi_class='ovr' (scikit-learn before 1.8 had that option): one LinearClassifier with
    post_transform LOGISTIC over all classes, then Normalizer(norm='L1'). The converter is run
    on a LogisticRegression that carries the one-vs-rest coefficients."""
    X_train, X_test, y_train, y_test = split(load_wine)
    scaler = StandardScaler().fit(X_train)
    ovr = fit_quiet(OneVsRestClassifier(LogisticRegression(max_iter=1000)), scaler.transform(X_train), y_train)
    lr = LogisticRegression()
    lr.coef_ = np.vstack([e.coef_ for e in ovr.estimators_])
    lr.intercept_ = np.concatenate([e.intercept_ for e in ovr.estimators_])
    lr.classes_ = ovr.classes_
    lr.n_features_in_ = X_train.shape[1]
    lr.multi_class = "ovr"
    pipe = Pipeline([("scaler", scaler), ("clf", lr)])
    name = "lr_ovr_wine_standard"
    m = export(pipe, X_train.shape[1], name, {id(lr): {"zipmap": False}})
    ops = [(n.op_type, onnx.helper.get_attribute_value(a)) for n in m.graph.node for a in n.attribute
           if a.name in ("post_transform", "norm")]
    assert ops == [("LinearClassifier", b"LOGISTIC"), ("Normalizer", b"L1")], ops
    sk = ovr.predict_proba(scaler.transform(X_test))
    meta = {
        "pattern": "skl2onnx LinearClassifier(LOGISTIC) + Normalizer(L1) of a one-vs-rest LogisticRegression, StandardScaler, on load_wine",
        "dataset": "load_wine",
        "output_kind": "one_vs_rest",
        "params": params(lr.coef_, lr.intercept_),
        "scaler_kind": "Standardise",
        "labels": [str(c) for c in lr.classes_],
    }
    save(out_dir, name, m, meta, X_test, y_test, X_train, sk,
         f"{SK} StandardScaler then OneVsRestClassifier(LogisticRegression).predict_proba")


def pixels784(x64):
    """8x8 digits (0..16) to 28x28 pixels (0..255): nearest neighbour, pixel (r, c) takes
    source pixel (r * 8 // 28, c * 8 // 28), value (v * 255 + 8) // 16."""
    x = np.asarray(x64, dtype=np.int64).reshape(-1, 8, 8)
    idx = np.arange(28) * 8 // 28
    big = x[:, idx][:, :, idx]
    return ((big * 255 + 8) // 16).reshape(-1, 784).astype(np.float32)


def pixels_case(out_dir):
    """The 784 -> 10 softmax classifier (7,850 parameters) on /255-scaled pixels."""
    X_train, X_test, y_train, y_test = split(load_digits)
    P_train, P_test = pixels784(X_train), pixels784(X_test)
    lr = fit_quiet(LogisticRegression(max_iter=2000), P_train / np.float32(255), y_train)
    name = "lr_pixels784_div255"
    inner = export(lr, 784, name, {id(lr): {"zipmap": False}})
    # Put Div(pixels, 255) in front: the graph's input is raw 0..255 pixels.
    g = inner.graph
    for n in g.node:
        n.input[:] = ["scaled" if i == "input" else i for i in n.input]
    div = helper.make_node("Div", ["input", "c255"], ["scaled"], name="div255")
    g.node.insert(0, div)
    g.initializer.append(numpy_helper.from_array(np.array(255.0, dtype=np.float32), "c255"))
    sk = lr.predict_proba(P_test / np.float32(255))
    meta = {
        "pattern": "Div(x, 255) in front of the skl2onnx export of LogisticRegression on load_digits enlarged to 28x28",
        "dataset": "load_digits (28x28, see pixels784)",
        "inputs_from": "lr_digits_minmax",
        "output_kind": "softmax",
        "params": params(lr.coef_, lr.intercept_),
        "scaler_kind": "Uniform",
        "labels": [str(c) for c in lr.classes_],
        "calibration_rows": CALIBRATION_ROWS,
    }
    save(out_dir, name, inner, meta, P_test, y_test, P_train, sk,
         f"{SK} LogisticRegression.predict_proba of pixels / 255", store_rows=False)


def unsupported_cases(out_dir):
    """Exports the importer must refuse, naming the node and op (tests/tests/linear_models.rs)."""
    X_train, _, y_train, _ = split(load_iris)
    # SGDClassifier with log loss on three classes: one-vs-rest written with Exp, Reciprocal,
    # ReduceSum, ... ops.
    sgd = fit_quiet(SGDClassifier(loss="log_loss", random_state=0), X_train, y_train)
    (out_dir / "bad_sgd_log_multiclass.onnx").write_bytes(
        export(sgd, 4, "sgd_log", {id(sgd): {"zipmap": False}}).SerializeToString())
    # LinearClassifier with post_transform PROBIT (valid ONNX-ML, never approximated).
    lr = fit_quiet(LogisticRegression(max_iter=1000), X_train, y_train)
    m = export(lr, 4, "probit", {id(lr): {"zipmap": False}})
    for n in m.graph.node:
        for a in n.attribute:
            if a.name == "post_transform":
                a.s = b"PROBIT"
    (out_dir / "bad_linear_probit.onnx").write_bytes(m.SerializeToString())
    # Per-class LOGISTIC over three classes without the Normalizer after it.
    m = export(lr, 4, "logistic3", {id(lr): {"zipmap": False}})
    g = m.graph
    norm = next(n for n in g.node if n.op_type == "Normalizer")
    lc = next(n for n in g.node if n.op_type == "LinearClassifier")
    for a in lc.attribute:
        if a.name == "post_transform":
            a.s = b"LOGISTIC"
    lc.output[1] = norm.output[0]
    g.node.remove(norm)
    (out_dir / "bad_linear_logistic_no_normalizer.onnx").write_bytes(m.SerializeToString())

    def edited(tag, edit):
        m = export(lr, 4, tag, {id(lr): {"zipmap": False}})
        edit(m.graph)
        (out_dir / f"bad_{tag}.onnx").write_bytes(m.SerializeToString())

    def node(g, op):
        return next(n for n in g.node if n.op_type == op)

    def set_string(n, name, value):
        next(a for a in n.attribute if a.name == name).s = value

    # SOFTMAX_ZERO (zero scores get probability 0): not approximated by a softmax.
    edited("linear_softmax_zero", lambda g: set_string(node(g, "LinearClassifier"), "post_transform", b"SOFTMAX_ZERO"))
    # An attribute LinearClassifier does not define (here one of SVMClassifier's).
    edited("linear_unknown_attribute",
           lambda g: node(g, "LinearClassifier").attribute.append(helper.make_attribute("kernel_type", "RBF")))
    # Normalizer with norm L2 after the softmax.
    edited("normalizer_l2", lambda g: set_string(node(g, "Normalizer"), "norm", b"L2"))
    # A binary LinearSVC whose ArrayFeatureExtractor picks column 0 (the negated score).
    Xb, _, yb, _ = split(load_breast_cancer)
    svc = fit_quiet(LinearSVC(random_state=0), Xb, yb)
    m = export(svc, Xb.shape[1], "svc_column_0", {id(svc): {}})
    col = next(t for t in m.graph.initializer if t.name.startswith("positive_class_index"))
    col.CopyFrom(numpy_helper.from_array(np.array([0], dtype=np.int64), col.name))
    (out_dir / "bad_svc_column_0.onnx").write_bytes(m.SerializeToString())


def main():
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).resolve().parents[1] / "fixtures" / "linear"
    out_dir.mkdir(parents=True, exist_ok=True)
    standard_cases(out_dir)
    one_vs_rest_case(out_dir)
    pixels_case(out_dir)
    unsupported_cases(out_dir)
    print(f"wrote {len(list(out_dir.glob('*.onnx')))} models to {out_dir}")


if __name__ == "__main__":
    main()
