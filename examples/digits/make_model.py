"""Builds the bundled `digits` example: a scikit-learn MLP on the UCI handwritten digits set.

Data: `sklearn.datasets.load_digits()` -- the test part of the UCI "Optical Recognition of Handwritten
Digits" data set (E. Alpaydin, C. Kaynak, 1998; UCI Machine Learning Repository), as bundled in
scikit-learn: 1,797 images of 8x8 pixels with values 0..16.

Outputs (in OUT_DIR, default: this script's directory):
  model.onnx              StandardScaler + MLPClassifier(64, 32, relu) exported with skl2onnx (no ZipMap)
  heldout.csv             f0..f63,label  -- the 25 % stratified held-out split, in split order
  calibration.csv         f0..f63        -- the first 300 training rows
  expected_proba.csv      p0..p9         -- predict_proba of the held-out rows (%.9g)
  reference_metrics.json  scikit-learn metrics on the held-out rows

Usage: python make_model.py [OUT_DIR]
"""

from __future__ import annotations

import os

# Single-threaded BLAS so the trained weights do not depend on thread scheduling.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import json  # noqa: E402
import sys  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from onnx.reference import ReferenceEvaluator  # noqa: E402
from skl2onnx import convert_sklearn  # noqa: E402
from skl2onnx.common.data_types import FloatTensorType  # noqa: E402
from sklearn.datasets import load_digits  # noqa: E402
from sklearn.metrics import confusion_matrix, precision_recall_fscore_support  # noqa: E402
from sklearn.model_selection import train_test_split  # noqa: E402
from sklearn.neural_network import MLPClassifier  # noqa: E402
from sklearn.pipeline import Pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

HERE = Path(__file__).resolve().parent
CALIBRATION_ROWS = 300
PROBA_TOLERANCE = 1e-5


def write_csv(path: Path, header: list[str], rows, fmt) -> None:
    with open(path, "w") as f:
        f.write(",".join(header) + "\n")
        for r in rows:
            f.write(",".join(fmt(v) for v in r) + "\n")


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else HERE
    out.mkdir(parents=True, exist_ok=True)

    digits = load_digits()
    X = digits.data.astype(np.int64)  # pixel values 0..16
    y = digits.target.astype(np.int64)
    X_train, X_test, y_train, y_test = train_test_split(X, y, test_size=0.25, random_state=0, stratify=y)

    clf = MLPClassifier(hidden_layer_sizes=(64, 32), activation="relu", max_iter=600, random_state=0)
    pipe = Pipeline([("scaler", StandardScaler()), ("mlp", clf)])
    pipe.fit(X_train.astype(np.float64), y_train)

    Xt = X_test.astype(np.float64)
    pred = pipe.predict(Xt)
    proba = pipe.predict_proba(Xt)
    score = float(pipe.score(Xt, y_test))
    correct = int(np.sum(pred == y_test))
    assert correct == round(score * len(y_test))

    onx = convert_sklearn(
        pipe,
        initial_types=[("input", FloatTensorType([None, 64]))],
        options={id(clf): {"zipmap": False}},
        target_opset={"": 17, "ai.onnx.ml": 3},
    )
    onx.graph.name = "digits_mlp"  # skl2onnx names the graph with a random UUID; fix it for reproducible bytes
    (out / "model.onnx").write_bytes(onx.SerializeToString())

    # Cross-check: the onnx package's reference evaluator on the exported graph reproduces predict_proba.
    try:
        sess = ReferenceEvaluator(onx)
    except Exception as exc:  # an op without a reference implementation
        print(f"note: ReferenceEvaluator cannot load the model ({exc}); ONNX probability check skipped")
    else:
        outputs = [o.name for o in onx.graph.output]
        res = dict(zip(outputs, sess.run(None, {"input": Xt.astype(np.float32)})))
        prob_name = next(n for n in outputs if "prob" in n)
        label_name = next(n for n in outputs if "label" in n)
        diff = float(np.max(np.abs(res[prob_name] - proba)))
        if diff > PROBA_TOLERANCE:
            raise AssertionError(f"ONNX reference probabilities differ from predict_proba by {diff:.3g}")
        if not np.array_equal(res[label_name].astype(np.int64), pred):
            raise AssertionError("ONNX reference labels differ from predict")
        print(f"ONNX ReferenceEvaluator matches predict_proba (max abs diff {diff:.2e})")

    write_csv(out / "heldout.csv", [f"f{i}" for i in range(64)] + ["label"],
              np.column_stack([X_test, y_test]), lambda v: str(int(v)))
    write_csv(out / "calibration.csv", [f"f{i}" for i in range(64)], X_train[:CALIBRATION_ROWS], lambda v: str(int(v)))
    write_csv(out / "expected_proba.csv", [f"p{i}" for i in range(10)], proba, lambda v: "%.9g" % v)

    precision, recall, f1, support = precision_recall_fscore_support(
        y_test, pred, labels=list(range(10)), zero_division=0
    )
    metrics = {
        "rows": int(len(y_test)),
        "correct": correct,
        "accuracy": score,
        "confusion_matrix": confusion_matrix(y_test, pred, labels=list(range(10))).tolist(),
        "precision": [float(v) for v in precision],
        "recall": [float(v) for v in recall],
        "f1": [float(v) for v in f1],
        "support": [int(v) for v in support],
        "predictions": [int(v) for v in pred],
    }
    with open(out / "reference_metrics.json", "w") as f:
        json.dump(metrics, f, indent=1)
        f.write("\n")
    print(f"digits: held-out accuracy {score:.4f} ({correct}/{len(y_test)}), "
          f"{clf.n_iter_} training iterations -> {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
