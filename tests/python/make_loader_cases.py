"""Reference cases for the converter's loaders: plain model descriptions, scaler files, datasets.

Sources outside the project:

* Data: `sklearn.datasets.load_iris` (Fisher's iris measurements) and `sklearn.datasets.load_digits`
  (UCI optical digits), both bundled in scikit-learn.
* Scalers: scikit-learn `StandardScaler` and `MinMaxScaler(feature_range=(-1, 1))` fitted on the whole
  iris data, dumped in the two-line way the docs show; expected values are `scaler.transform` of a few
  rows. The rows are first rounded to float32 (what the runtime receives) so that the comparison measures
  the scaler, not the input rounding.
* Models: dense classifiers in the Keras/scikit-learn layout (kernels `[inputs, outputs]`) with seeded
  random weights rounded to 4 decimals. Expected outputs are computed here in float64 with exactly
  rounded dot products (`math.fsum`) after applying the scaler in float32 (as `Scaler::apply` does),
  and cross-checked against scikit-learn's `MLPClassifier.predict_proba` with the same weights.
* `.npy` files are written by `numpy.save`, in float32, float64, int64 and `<U` string dtypes, C and
  Fortran order.

Writes into the output directory (default: tests/fixtures/loaders):
  iris_standard_scaler.json, iris_minmax_scaler.json, divide_by_255.json, factor_offset.json,
  iris_scalers_expected.json, iris_mlp_inline.json, iris_mlp_npy.json, iris_binary_npy.json,
  iris_mlp_*.npy, iris_binary_*.npy, models_expected.json, iris_sample.csv, iris_x_f32.npy,
  iris_x_f64_fortran.npy, iris_y_int64.npy, iris_y_str.npy, digits_x_int64.npy, digits_y_int64.npy,
  datasets_expected.json, doc_example/dense0_kernel.npy, doc_example/dense0_bias.npy

Usage: python make_loader_cases.py [OUT_DIR]
"""

from __future__ import annotations

import csv
import json
import math
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.datasets import load_digits, load_iris
from sklearn.exceptions import ConvergenceWarning
from sklearn.neural_network import MLPClassifier
from sklearn.preprocessing import MinMaxScaler, StandardScaler

sys.dont_write_bytecode = True
SEED = 20261201
DEFAULT_OUT = Path(__file__).resolve().parent.parent / "fixtures" / "loaders"
F32 = np.float32
# Every 13th iris row: 12 rows covering the three species.
IRIS_ROWS = list(range(0, 150, 13))


def to_json(obj, indent: int = 0) -> str:
    """JSON with objects and lists of lists spread over lines, lists of scalars on one line."""
    pad, inner = " " * indent, " " * (indent + 2)
    if isinstance(obj, dict):
        items = [f"{inner}{json.dumps(k)}: {to_json(v, indent + 2)}" for k, v in obj.items()]
        return "{\n" + ",\n".join(items) + "\n" + pad + "}"
    if isinstance(obj, list) and any(isinstance(v, (list, dict)) for v in obj):
        return "[\n" + ",\n".join(inner + to_json(v, indent + 2) for v in obj) + "\n" + pad + "]"
    return json.dumps(obj)


def dump(path: Path, obj) -> None:
    path.write_text(to_json(obj) + "\n")


def scaler_cases(out: Path, x: np.ndarray) -> tuple[dict, dict]:
    std = StandardScaler().fit(x)
    mm = MinMaxScaler(feature_range=(-1, 1)).fit(x)
    # The two-line dumps from docs/plain-model-format.md.
    std_json = {"mean": std.mean_.tolist(), "std": std.scale_.tolist()}
    mm_json = {"min": mm.data_min_.tolist(), "max": mm.data_max_.tolist(), "range": list(mm.feature_range)}
    dump(out / "iris_standard_scaler.json", std_json)
    dump(out / "iris_minmax_scaler.json", mm_json)
    dump(out / "divide_by_255.json", {"divide_by": 255})
    dump(out / "factor_offset.json", {"factor": 0.00392, "offset": 0})
    rows32 = x[IRIS_ROWS].astype(F32).astype(np.float64)
    dump(out / "iris_scalers_expected.json", {
        "source": "sklearn.datasets.load_iris rows %s rounded to float32; scikit-learn transform" % IRIS_ROWS,
        "rows": rows32.tolist(),
        "standard": std.transform(rows32).tolist(),
        "minmax": mm.transform(rows32).tolist(),
    })
    return std_json, mm_json


def scaler_f32(spec: dict):
    """The affine map `(x - offset) * scale` that the converter builds from a scaler object, in f32."""
    if "mean" in spec:
        off = np.array(spec["mean"], dtype=np.float64)
        sc = 1.0 / np.array(spec["std"], dtype=np.float64)
    else:
        lo, hi = spec["range"]
        mn, mx = np.array(spec["min"]), np.array(spec["max"])
        sc = (hi - lo) / (mx - mn)
        off = mn - lo / sc
    return off.astype(F32), sc.astype(F32)


def forward(spec: dict, layers: list[tuple[np.ndarray, np.ndarray, str]], out_fn: str, x: np.ndarray):
    """Reference forward pass: f32 scaler, then exact f64 dot products of f32 weights."""
    off, sc = scaler_f32(spec)
    h = ((x.astype(F32) - off) * sc).astype(np.float64)
    for kernel, bias, act in layers:  # kernel [inputs, outputs], float32 values
        k = kernel.astype(np.float64)
        y = np.array([math.fsum(list(k[:, o] * h)) + float(bias[o]) for o in range(k.shape[1])])
        h = np.maximum(y, 0.0) if act == "relu" else y
    if out_fn == "softmax":
        e = np.array([math.exp(v - h.max()) for v in h])
        return (e / math.fsum(list(e))).tolist()
    return [1.0 / (1.0 + math.exp(-v)) for v in h]


def random_layers(rng, sizes: list[int]) -> list[tuple[np.ndarray, np.ndarray, str]]:
    layers = []
    for i, (n_in, n_out) in enumerate(zip(sizes, sizes[1:])):
        k = np.round(rng.normal(0.0, 1.0 / math.sqrt(n_in), size=(n_in, n_out)), 4).astype(F32)
        b = np.round(rng.normal(0.0, 0.3, size=n_out), 4).astype(F32)
        layers.append((k, b, "relu" if i < len(sizes) - 2 else "linear"))
    return layers


def sklearn_check(spec, layers, x, classes: list[int], expected: list[list[float]]) -> None:
    """scikit-learn's MLPClassifier with the same weights must give the same probabilities."""
    hidden = tuple(k.shape[1] for k, _, _ in layers[:-1])
    clf = MLPClassifier(hidden_layer_sizes=hidden, max_iter=1, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        clf.fit(np.zeros((len(classes), x.shape[1])), classes)
    clf.coefs_ = [k.astype(np.float64) for k, _, _ in layers]
    clf.intercepts_ = [b.astype(np.float64) for _, b, _ in layers]
    off, sc = scaler_f32(spec)
    xs = ((x.astype(F32) - off) * sc).astype(np.float64)
    proba = clf.predict_proba(xs)
    if proba.shape[1] == 2:  # binary: predict_proba is [1 - p, p]; the model outputs p
        proba = proba[:, 1:]
    diff = np.max(np.abs(proba - np.array(expected)))
    assert diff < 1e-12, f"scikit-learn disagrees with the reference forward pass by {diff}"


def json_layer(kernel, bias, act, weights) -> dict:
    return {"inputs": int(kernel.shape[0]), "outputs": int(kernel.shape[1]), "activation": act,
            "weights": weights, "bias": bias}


def model_cases(out: Path, x: np.ndarray, target: np.ndarray, names: list[str], std_json, mm_json) -> None:
    rng = np.random.default_rng(SEED)
    rows = x[IRIS_ROWS]

    # Three-class model, 4 -> 6 -> 5 -> 3, ReLU, softmax; inline standard scaler.
    mlp = random_layers(rng, [4, 6, 5, 3])
    (k0, b0, a0), (k1, b1, a1), (k2, b2, a2) = mlp
    # The 4-decimal numbers that were rounded to float32 (the converter parses f64, then rounds).
    f = lambda a: [round(float(v), 4) for v in a]  # noqa: E731
    inline = {
        "kinglet_model": 1,
        "input_width": 4,
        "scaler": std_json,
        "layers": [
            # Keras kernel as rows [inputs][outputs].
            json_layer(k0, f(b0), a0, {"layout": "in_out", "values": [f(r) for r in k0]}),
            # Keras kernel flattened (kernel.ravel()).
            json_layer(k1, f(b1), a1, {"layout": "in_out", "values": f(k1.ravel())}),
            # PyTorch-style rows [outputs][inputs]: the default nested form.
            json_layer(k2, f(b2), a2, [f(r) for r in k2.T]),
        ],
        "output": "softmax",
        "labels": names,
    }
    dump(out / "iris_mlp_inline.json", inline)
    np.save(out / "iris_mlp_k0_f32.npy", k0)
    np.save(out / "iris_mlp_b0_f32.npy", b0)
    np.save(out / "iris_mlp_k1_f64_fortran.npy", np.asfortranarray(k1.astype(np.float64)))
    np.save(out / "iris_mlp_b1_f64.npy", b1.astype(np.float64))
    np.save(out / "iris_mlp_w2_out_in_f32.npy", np.ascontiguousarray(k2.T))
    np.save(out / "iris_mlp_b2_f32.npy", b2)
    npy = dict(inline)
    npy["layers"] = [
        json_layer(k0, {"npy": "iris_mlp_b0_f32.npy"}, a0, {"layout": "in_out", "npy": "iris_mlp_k0_f32.npy"}),
        json_layer(k1, {"npy": "iris_mlp_b1_f64.npy"}, a1,
                   {"layout": "in_out", "npy": "iris_mlp_k1_f64_fortran.npy"}),
        json_layer(k2, {"npy": "iris_mlp_b2_f32.npy"}, a2, {"layout": "out_in", "npy": "iris_mlp_w2_out_in_f32.npy"}),
    ]
    dump(out / "iris_mlp_npy.json", npy)
    mlp_proba = [forward(std_json, mlp, "softmax", r) for r in rows]
    sklearn_check(std_json, mlp, rows, [0, 1, 2], mlp_proba)

    # Binary model (virginica or not), 4 -> 3 -> 1, sigmoid; inline min-max scaler.
    binary = random_layers(rng, [4, 3, 1])
    (c0, d0, e0), (c1, d1, e1) = binary
    np.save(out / "iris_binary_k0_f32.npy", c0)
    np.save(out / "iris_binary_b0_f32.npy", d0)
    np.save(out / "iris_binary_k1_f32.npy", c1)
    np.save(out / "iris_binary_b1_f32.npy", d1)
    dump(out / "iris_binary_npy.json", {
        "kinglet_model": 1,
        "input_width": 4,
        "scaler": mm_json,
        "layers": [
            json_layer(c0, {"npy": "iris_binary_b0_f32.npy"}, e0, {"layout": "in_out", "npy": "iris_binary_k0_f32.npy"}),
            json_layer(c1, {"npy": "iris_binary_b1_f32.npy"}, e1, {"layout": "in_out", "npy": "iris_binary_k1_f32.npy"}),
        ],
        "output": "sigmoid",
        "labels": ["other", "virginica"],
    })
    binary_p = [forward(mm_json, binary, "sigmoid", r) for r in rows]
    sklearn_check(mm_json, binary, rows, [0, 1], binary_p)

    dump(out / "models_expected.json", {
        "source": "numpy/math.fsum reference forward pass, cross-checked with scikit-learn MLPClassifier",
        "inputs": rows.tolist(),
        "iris_mlp": mlp_proba,
        "iris_binary": binary_p,
    })


def dataset_cases(out: Path, x: np.ndarray, target: np.ndarray, names: list[str]) -> None:
    rows = x[IRIS_ROWS]
    labels = target[IRIS_ROWS]
    header = ["sepal_length", "sepal_width", "petal_length", "petal_width", "species"]
    with open(out / "iris_sample.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(header)
        for r, y in zip(rows, labels):
            w.writerow([repr(float(v)) for v in r] + [names[y]])
    np.save(out / "iris_x_f32.npy", rows.astype(F32))
    np.save(out / "iris_x_f64_fortran.npy", np.asfortranarray(rows))
    np.save(out / "iris_y_int64.npy", labels.astype(np.int64))
    np.save(out / "iris_y_str.npy", np.array([names[y] for y in labels]))
    digits = load_digits()
    np.save(out / "digits_x_int64.npy", digits.data[:10].astype(np.int64))
    np.save(out / "digits_y_int64.npy", digits.target[:10].astype(np.int64))
    dump(out / "datasets_expected.json", {
        "source": "sklearn.datasets.load_iris rows %s; sklearn.datasets.load_digits rows 0-9" % IRIS_ROWS,
        "iris_x": rows.tolist(),
        "iris_y": labels.tolist(),
        "iris_names": names,
        "digits_x": digits.data[:10].astype(int).tolist(),
        "digits_y": digits.target[:10].tolist(),
    })


def doc_example_cases(out: Path) -> None:
    """The .npy files that the full example in docs/plain-model-format.md refers to."""
    rng = np.random.default_rng(SEED + 1)
    d = out / "doc_example"
    d.mkdir(exist_ok=True)
    np.save(d / "dense0_kernel.npy", np.round(rng.normal(0.0, 0.5, size=(4, 8)), 4).astype(F32))
    np.save(d / "dense0_bias.npy", np.round(rng.normal(0.0, 0.1, size=8), 4).astype(F32))


def main() -> None:
    out = Path(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_OUT
    out.mkdir(parents=True, exist_ok=True)
    iris = load_iris()
    x, target = iris.data, iris.target
    names = [str(n) for n in iris.target_names]
    std_json, mm_json = scaler_cases(out, x)
    model_cases(out, x, target, names, std_json, mm_json)
    dataset_cases(out, x, target, names)
    doc_example_cases(out)


if __name__ == "__main__":
    main()
