#!/usr/bin/env python3
"""Builds the weight-precision search fixtures under tests/fixtures/search/ (or the directory given).

`mlp_pixels784_div255`: a scikit-learn MLPClassifier(hidden_layer_sizes=(100,), ReLU) — the
784 -> 100 -> 10 shape, 79,510 parameters — trained on load_digits enlarged to 28x28 pixels
0..255 (`pixels784` of make_linear_cases.py) divided by 255, with the stratified 25 % held-out
split of the other fixtures (train_test_split, random_state=0). Exported with skl2onnx (no
ZipMap), with Div(x, 255) put in front so the graph takes raw pixels. Like
`lr_pixels784_div255` it stores no rows: the held-out rows and the 300 calibration rows are
those of tests/fixtures/linear/lr_digits_minmax.json enlarged by the same integer formula
(tests/tests/precision_search.rs computes it). References for the held-out rows: scikit-learn's
predict_proba and onnx.reference.ReferenceEvaluator.

Dataset: load_digits (UCI Optical Recognition of Handwritten Digits), bundled with scikit-learn.

Run with the reference venv:  .venv/bin/python tests/python/make_search_cases.py [OUT_DIR]
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import sys  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from onnx import helper, numpy_helper  # noqa: E402
from sklearn.datasets import load_digits  # noqa: E402
from sklearn.neural_network import MLPClassifier  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from make_linear_cases import SK, CALIBRATION_ROWS, export, fit_quiet, pixels784, save, split  # noqa: E402


def mlp_pixels_case(out_dir):
    X_train, X_test, y_train, y_test = split(load_digits)
    P_train, P_test = pixels784(X_train), pixels784(X_test)
    mlp = fit_quiet(MLPClassifier(hidden_layer_sizes=(100,), activation="relu", max_iter=300,
                                  random_state=0), P_train / np.float32(255), y_train)
    name = "mlp_pixels784_div255"
    inner = export(mlp, 784, name, {id(mlp): {"zipmap": False}})
    g = inner.graph
    for n in g.node:
        n.input[:] = ["scaled" if i == "input" else i for i in n.input]
    g.node.insert(0, helper.make_node("Div", ["input", "c255"], ["scaled"], name="div255"))
    g.initializer.append(numpy_helper.from_array(np.array(255.0, dtype=np.float32), "c255"))
    sk = mlp.predict_proba(P_test / np.float32(255))
    n_params = sum(int(w.size) for w in mlp.coefs_) + sum(int(b.size) for b in mlp.intercepts_)
    meta = {
        "pattern": "Div(x, 255) in front of the skl2onnx export of MLPClassifier((100,)) on load_digits enlarged to 28x28",
        "dataset": "load_digits (28x28, see pixels784 in make_linear_cases.py)",
        "inputs_from": "lr_digits_minmax",
        "output_kind": "softmax",
        "params": n_params,
        "scaler_kind": "Uniform",
        "labels": [str(c) for c in mlp.classes_],
        "calibration_rows": CALIBRATION_ROWS,
        "sklearn_heldout_correct": int(np.sum(mlp.predict(P_test / np.float32(255)) == y_test)),
    }
    save(out_dir, name, inner, meta, P_test, y_test, P_train, sk,
         f"{SK} MLPClassifier.predict_proba of pixels / 255", store_rows=False)


def main():
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).resolve().parents[1] / "fixtures" / "search"
    out_dir.mkdir(parents=True, exist_ok=True)
    mlp_pixels_case(out_dir)


if __name__ == "__main__":
    main()
