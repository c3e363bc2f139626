"""Shared parts of the exporter fixture scripts (make_torch_cases.py, make_tf_cases.py) and of
their check in the reference venv (check_exporter_refs.py): the dataset splits, the JSON layout,
the reference evaluation. Needs only numpy, scikit-learn and onnx.

Every case is trained on a scikit-learn bundled dataset with the same stratified 25 % held-out
split as make_linear_cases.py (train_test_split, random_state=0): load_iris (Fisher 1936),
load_wine (UCI Wine), load_breast_cancer (UCI Breast Cancer Wisconsin, diagnostic), load_digits
(UCI Optical Recognition of Handwritten Digits, 8x8 pixels 0..16).

NAME.json holds: the pattern, dataset, output kind, parameter count, scaler kind, the held-out
rows (flattened) with their labels, calibration rows (the first 300 training rows), and two
references for the held-out rows: the framework's own output, computed when the file was made,
and onnx.reference.ReferenceEvaluator's output on the committed NAME.onnx.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import onnx
from onnx.reference import ReferenceEvaluator
from sklearn.datasets import load_breast_cancer, load_digits, load_iris, load_wine
from sklearn.model_selection import train_test_split

REF_SOURCE = f"onnx.reference.ReferenceEvaluator (onnx {onnx.__version__})"
CALIBRATION_ROWS = 300
LOADERS = {
    "load_iris": load_iris,
    "load_wine": load_wine,
    "load_breast_cancer": load_breast_cancer,
    "load_digits": load_digits,
}


def default_dir() -> Path:
    return Path(__file__).resolve().parents[1] / "fixtures" / "exporters"


def split(dataset: str):
    d = LOADERS[dataset]()
    X = d.data.astype(np.float32)
    y = d.target.astype(np.int64)
    return train_test_split(X, y, test_size=0.25, random_state=0, stratify=y)


def f32_list(a):
    """Float32 values as the shortest decimal that reads back to the same float32."""
    return [[float(np.format_float_positional(np.float32(v), unique=True, trim="-")) for v in r]
            for r in np.asarray(a, dtype=np.float32).reshape(len(a), -1)]


def g9_list(a):
    """Float64 values to 9 significant digits (a relative change below 1e-8: far inside the
    1e-5 the tests allow), to keep the files small."""
    return [[float(f"{v:.9g}") for v in r] for r in np.asarray(a, dtype=np.float64).reshape(len(a), -1)]


def reference(m: onnx.ModelProto, x: np.ndarray) -> np.ndarray:
    """The model's first output on rows `x` (reshaped to the graph input's static dims)."""
    inp = m.graph.input[0]
    dims = [d.dim_value for d in inp.type.tensor_type.shape.dim][1:]
    feed = np.asarray(x, dtype=np.float32).reshape([len(x)] + dims)
    out = ReferenceEvaluator(m).run(None, {inp.name: feed})
    return np.asarray(out[0], dtype=np.float32).reshape(len(x), -1)


def save(out_dir: Path, name: str, m: onnx.ModelProto, meta: dict, x_test, y_test, x_cal,
         framework_rows, framework_source: str, store_rows: bool = True) -> float:
    """Writes NAME.onnx and NAME.json; returns the largest |framework - ReferenceEvaluator|."""
    onnx.checker.check_model(m)
    (out_dir / f"{name}.onnx").write_bytes(m.SerializeToString())
    ref = reference(m, x_test)
    fw = np.asarray(framework_rows, dtype=np.float64).reshape(len(x_test), -1)
    gap = float(np.max(np.abs(ref.astype(np.float64) - fw)))
    doc = dict(meta)
    doc.update({
        "model": f"{name}.onnx",
        "heldout_labels": [int(v) for v in y_test],
        "framework": {"source": framework_source, "rows": g9_list(fw)},
        "expected": {"source": REF_SOURCE, "output": m.graph.output[0].name, "rows": g9_list(ref)},
    })
    if store_rows:
        doc["heldout"] = f32_list(x_test)
        doc["calibration"] = f32_list(np.asarray(x_cal)[:CALIBRATION_ROWS])
    (out_dir / f"{name}.json").write_text(json.dumps(doc, separators=(",", ":")) + "\n")
    ops = " ".join(n.op_type for n in m.graph.node)
    print(f"{name}: {len(x_test)} held-out rows; ReferenceEvaluator vs framework max |diff| = {gap:.2e}; {ops}")
    return gap


def dense_params(*shapes) -> int:
    """Parameter count of dense layers given (in, out) pairs: in*out + out each."""
    return int(sum(i * o + o for i, o in shapes))
