"""Trains and exports the `vibration` demo model (INVENTED data, see README.md).

Generates 2,000 balanced training windows (seed 1) and 600 balanced held-out windows (seed 2) with
generate.py, extracts the 15 features of features.py / FEATURES.md, fits StandardScaler +
MLPClassifier(hidden_layer_sizes=(24, 12), relu, random_state=0, max_iter=800) on string labels and
exports it to ONNX with skl2onnx (zipmap off; the class names stay in the graph's label branch).

scikit-learn orders string classes alphabetically; after fitting, the output units are permuted
into the scenario's class order (normal, imbalance, bearing_wear, loose_mount) so that probability
column k and replay label k mean the same class everywhere. The permutation only relabels output
units (the network function is unchanged), and it is checked below against the unpermuted model.

Outputs (in OUT_DIR, default: this script's directory): model.onnx, heldout.csv, calibration.csv,
expected_proba.csv, replay_windows.npy, replay_labels.npy.

Usage: python train.py [OUT_DIR]
"""

from __future__ import annotations

import os

# Single-threaded BLAS so the trained weights do not depend on thread scheduling.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import sys  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from onnx.reference import ReferenceEvaluator  # noqa: E402
from skl2onnx import convert_sklearn  # noqa: E402
from skl2onnx.common.data_types import FloatTensorType  # noqa: E402
from sklearn.neural_network import MLPClassifier  # noqa: E402
from sklearn.pipeline import Pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.dont_write_bytecode = True  # keep the source tree free of __pycache__
sys.path.insert(0, str(HERE))
import features  # noqa: E402
import generate  # noqa: E402

TRAIN_PER_CLASS = 500
HELDOUT_PER_CLASS = 150
TRAIN_SEED = 1
HELDOUT_SEED = 2
CALIBRATION_ROWS = 300
REPLAY_WINDOWS = 64
PROBA_TOLERANCE = 1e-5


def reorder_classes(clf: MLPClassifier, order: tuple[str, ...]) -> None:
    """Permutes the output units of a fitted MLPClassifier so that classes_ == order."""
    current = [str(c) for c in clf.classes_]
    perm = [current.index(c) for c in order]
    clf.coefs_[-1] = clf.coefs_[-1][:, perm]
    clf.intercepts_[-1] = clf.intercepts_[-1][perm]
    new_classes = np.array(order, dtype=clf.classes_.dtype)
    clf.classes_ = new_classes
    clf._label_binarizer.classes_ = new_classes  # used by predict(); private but pinned version


def write_rows(path: Path, header: list[str], rows) -> None:
    with open(path, "w") as f:
        f.write(",".join(header) + "\n")
        for r in rows:
            f.write(",".join(r) + "\n")


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else HERE
    out.mkdir(parents=True, exist_ok=True)
    classes = generate.CLASSES

    w_train, y_train = generate.make_dataset(TRAIN_PER_CLASS, TRAIN_SEED)
    w_test, y_test = generate.make_dataset(HELDOUT_PER_CLASS, HELDOUT_SEED)
    X_train = features.batch_features(w_train)
    X_test = features.batch_features(w_test)
    names_train = np.array([classes[i] for i in y_train])
    names_test = np.array([classes[i] for i in y_test])

    clf = MLPClassifier(hidden_layer_sizes=(24, 12), activation="relu", random_state=0, max_iter=800)
    pipe = Pipeline([("scaler", StandardScaler()), ("mlp", clf)])
    pipe.fit(X_train, names_train)

    before = pipe.predict_proba(X_test)
    sorted_classes = [str(c) for c in clf.classes_]
    reorder_classes(clf, classes)
    proba = pipe.predict_proba(X_test)
    pred = pipe.predict(X_test)
    expected_perm = before[:, [sorted_classes.index(c) for c in classes]]
    assert np.allclose(proba, expected_perm, rtol=0, atol=1e-15), "class permutation changed the model"
    assert np.array_equal(pred, np.array(classes)[np.argmax(proba, axis=1)])
    accuracy = float(np.mean(pred == names_test))

    onx = convert_sklearn(
        pipe,
        initial_types=[("input", FloatTensorType([None, len(features.FEATURE_NAMES)]))],
        options={id(clf): {"zipmap": False}},
        target_opset={"": 17, "ai.onnx.ml": 3},
    )
    onx.graph.name = "vibration_mlp"  # skl2onnx names the graph with a random UUID; fix it for reproducible bytes
    (out / "model.onnx").write_bytes(onx.SerializeToString())

    # Cross-check with the onnx package's reference evaluator (float32 graph vs float64 scikit-learn).
    try:
        sess = ReferenceEvaluator(onx)
    except Exception as exc:
        print(f"note: ReferenceEvaluator cannot load the model ({exc}); ONNX probability check skipped")
    else:
        outputs = [o.name for o in onx.graph.output]
        res = dict(zip(outputs, sess.run(None, {"input": X_test.astype(np.float32)})))
        p_onnx = res[next(n for n in outputs if "prob" in n)]
        labels_onnx = res[next(n for n in outputs if "label" in n)]
        diff = float(np.max(np.abs(p_onnx - proba)))
        if diff > PROBA_TOLERANCE:
            raise AssertionError(f"ONNX reference probabilities differ from predict_proba by {diff:.3g}")
        agree = float(np.mean(np.array([str(v) for v in labels_onnx]) == pred))
        print(f"ONNX ReferenceEvaluator: max |p_onnx - p_sklearn| = {diff:.2e}, label agreement {agree:.4f}")

    write_rows(out / "heldout.csv", features.FEATURE_NAMES + ["label"],
               ([repr(float(v)) for v in x] + [n] for x, n in zip(X_test, names_test)))
    write_rows(out / "calibration.csv", features.FEATURE_NAMES,
               ([repr(float(v)) for v in x] for x in X_train[:CALIBRATION_ROWS]))
    write_rows(out / "expected_proba.csv", [f"p{i}" for i in range(len(classes))],
               (["%.9g" % v for v in p] for p in proba))
    np.save(out / "replay_windows.npy", np.ascontiguousarray(w_test[:REPLAY_WINDOWS], dtype=np.int16))
    np.save(out / "replay_labels.npy", y_test[:REPLAY_WINDOWS].astype(np.int64))

    print(f"vibration: held-out accuracy {accuracy:.4f} ({int(np.sum(pred == names_test))}/{len(pred)}), "
          f"{clf.n_iter_} training iterations -> {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
