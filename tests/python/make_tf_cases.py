#!/usr/bin/env python3
"""Builds the TensorFlow/Keras-exported fixtures under tests/fixtures/exporters/ (or the
directory given): Keras models trained on scikit-learn bundled datasets and converted by tf2onnx
(`tf2onnx.convert.from_function` of the model's call: tf2onnx's `from_keras` does not take
Keras 3 models), in the forms it writes:

  tf_digits_keras_opset13        Rescaling(1/16), Flatten -> Reshape with a [-1, 64] initializer,
                                 Dense as MatMul + Add, tensor names with ':' and '/'
  tf_digits_keras_opset18_unoptimized   the same model with tf2onnx's graph optimizers off:
                                 Reshape's shape computed from the input's Shape (Cast, Slice,
                                 Squeeze, Unsqueeze, Concat, Cast), Identity chain at the output
  tf_wine_keras_opset15          standardisation (x - mean) / std as Sub + Mul (TensorFlow turns
                                 the division into a product), Dense, Relu, Dense, Softmax
  tf_breast_cancer_keras_opset18 logistic regression: standardisation, Dense(1, sigmoid), at the
                                 newest opset tf2onnx 1.17 writes (18)

tf2onnx folds a Transpose of a weight before it writes the graph (TensorFlow's own graph
optimisation folds it, even with tf2onnx's optimizers off), so "Transpose applied to an
initializer" comes from the PyTorch exporter with folding off (make_torch_cases.py,
torch_digits_opset13_nofold) and from the hand-built tf2onnx-style graph in
make_onnx_cases.py (tf_transposed_weight).

Datasets and JSON layout: tests/python/exporter_common.py. Each JSON records Keras's own output
(`model.predict`) on the held-out rows and onnx.reference.ReferenceEvaluator's on the export.

This script needs TensorFlow and tf2onnx, which the reference venv does not have and CI never
installs: the files are committed, and check_fixtures.py (run_all.sh) re-evaluates them with
ReferenceEvaluator instead of rerunning this (check_exporter_refs.py).

Made with: tensorflow-cpu 2.21.0, keras 3.15.1, tf2onnx 1.17.0, onnx 1.23.2, protobuf 7.36.2,
numpy 2.4.6, scikit-learn 1.9.1, Python 3.11; the same versions regenerate the files. Command:

  python3 -m venv /work/venv-tf
  /work/venv-tf/bin/pip install tensorflow-cpu==2.21.0 keras==3.15.1 tf2onnx==1.17.0 onnx==1.23.2 protobuf==7.36.2 numpy==2.4.6 scikit-learn==1.9.1
  /work/venv-tf/bin/python tests/python/make_tf_cases.py [OUT_DIR]
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
os.environ.setdefault("TF_CPP_MIN_LOG_LEVEL", "3")
os.environ.setdefault("TF_DETERMINISTIC_OPS", "1")
os.environ.setdefault("CUDA_VISIBLE_DEVICES", "")

import sys  # noqa: E402
from pathlib import Path  # noqa: E402

import keras  # noqa: E402
import numpy as np  # noqa: E402
import tensorflow as tf  # noqa: E402
import tf2onnx  # noqa: E402
from tf2onnx import optimizer as tf2onnx_optimizer  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from exporter_common import default_dir, dense_params, save, split  # noqa: E402

TF = f"Keras {keras.__version__} (TensorFlow {tf.__version__}), tf2onnx {tf2onnx.__version__}"


def seed():
    keras.utils.set_random_seed(0)
    tf.config.experimental.enable_op_determinism()


def fit(model, x, y, epochs, lr, binary=False):
    loss = "binary_crossentropy" if binary else "sparse_categorical_crossentropy"
    model.compile(optimizer=keras.optimizers.Adam(learning_rate=lr), loss=loss)
    model.fit(x, y.astype(np.float32) if binary else y, epochs=epochs, batch_size=len(x), shuffle=False,
              verbose=0)
    return model


def convert(call, shape, opset, optimized=True):
    spec = [tf.TensorSpec([None, *shape], tf.float32, name="input")]
    saved = dict(tf2onnx_optimizer._optimizers)
    if not optimized:
        tf2onnx_optimizer._optimizers.clear()
    try:
        m, _ = tf2onnx.convert.from_function(tf.function(call), input_signature=spec, opset=opset)
    finally:
        tf2onnx_optimizer._optimizers.clear()
        tf2onnx_optimizer._optimizers.update(saved)
    m.graph.name = "tf2onnx"
    return m


def ops(m):
    return [n.op_type for n in m.graph.node]


def meta(pattern, dataset, kind, params, scaler, labels, **extra):
    d = {"pattern": pattern, "dataset": dataset, "output_kind": kind, "params": params,
         "scaler_kind": scaler, "labels": [str(v) for v in labels], "exporter": TF}
    d.update(extra)
    return d


def predict(model, x):
    return model.predict(x, verbose=0)


def digits_cases(out_dir):
    X_train, X_test, y_train, y_test = split("load_digits")
    img_train, img_test = X_train.reshape(-1, 8, 8), X_test.reshape(-1, 8, 8)
    seed()
    model = keras.Sequential([
        keras.Input((8, 8)),
        keras.layers.Rescaling(1.0 / 16),
        keras.layers.Flatten(),
        keras.layers.Dense(32, activation="relu"),
        keras.layers.Dense(10, activation="softmax"),
    ])
    fit(model, img_train, y_train, 300, 0.01)
    fw = predict(model, img_test)
    params = dense_params((64, 32), (32, 10))
    m = convert(model, (8, 8), 13)
    assert "MatMul" in ops(m) and "Reshape" in ops(m), ops(m)
    save(out_dir, "tf_digits_keras_opset13", m,
         meta("tf2onnx of Keras Rescaling, Flatten, Dense(relu), Dense(softmax), opset 13: Mul, Reshape, MatMul + Add",
              "load_digits", "softmax", params, "Uniform", range(10), input_shape=[None, 8, 8]),
         X_test, y_test, X_train, fw, f"{TF}: Keras predict")
    m = convert(model, (8, 8), 18, optimized=False)
    assert "Shape" in ops(m) and "Identity" in ops(m), ops(m)
    save(out_dir, "tf_digits_keras_opset18_unoptimized", m,
         meta("tf2onnx with its optimizers off, opset 18: Reshape shape from Shape/Cast/Slice/Squeeze/Unsqueeze/Concat, Identity chain",
              "load_digits", "softmax", params, "Uniform", range(10), input_shape=[None, 8, 8],
              inputs_from="tf_digits_keras_opset13"),
         X_test, y_test, X_train, fw, f"{TF}: Keras predict", store_rows=False)


def standardised(model, x_train):
    """`model` behind `(x - mean) / std` of the training rows, as TensorFlow ops on constants
    (TensorFlow's graph optimiser turns the division into a multiplication by the reciprocal,
    so tf2onnx writes Sub + Mul). The constants are made inside the traced function: tf2onnx
    1.17 drops a tensor captured from outside it (and the mean of Keras's Normalization layer)
    from the converted graph, whose Sub then reads a value that nothing defines."""
    mean = x_train.mean(axis=0).astype(np.float32)
    std = (x_train.std(axis=0) + 1e-6).astype(np.float32)
    return lambda x: model((x - tf.constant(mean)) / tf.constant(std)), lambda x: predict(model, (x - mean) / std)


def wine_case(out_dir):
    X_train, X_test, y_train, y_test = split("load_wine")
    seed()
    model = keras.Sequential([
        keras.Input((13,)),
        keras.layers.Dense(16, activation="relu"),
        keras.layers.Dense(3, activation="softmax"),
    ])
    call, run = standardised(model, X_train)
    fit(model, (X_train - X_train.mean(0)) / (X_train.std(0) + 1e-6), y_train, 300, 0.01)
    m = convert(call, (13,), 15)
    save(out_dir, "tf_wine_keras_opset15", m,
         meta("tf2onnx of (x - mean) / std, Keras Dense(relu), Dense(softmax), opset 15: Sub, Mul, MatMul + Add",
              "load_wine", "softmax", dense_params((13, 16), (16, 3)), "Standardise", range(3)),
         X_test, y_test, X_train, run(X_test), f"{TF}: Keras predict of the standardised rows")


def breast_cancer_case(out_dir):
    X_train, X_test, y_train, y_test = split("load_breast_cancer")
    seed()
    model = keras.Sequential([keras.Input((30,)), keras.layers.Dense(1, activation="sigmoid")])
    call, run = standardised(model, X_train)
    fit(model, (X_train - X_train.mean(0)) / (X_train.std(0) + 1e-6), y_train, 400, 0.01, binary=True)
    m = convert(call, (30,), 18)
    save(out_dir, "tf_breast_cancer_keras_opset18", m,
         meta("tf2onnx of (x - mean) / std, Keras Dense(1, sigmoid) (logistic regression), opset 18",
              "load_breast_cancer", "sigmoid", dense_params((30, 1)), "Standardise", range(2)),
         X_test, y_test, X_train, run(X_test), f"{TF}: Keras predict of the standardised rows")


def main():
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else default_dir()
    out_dir.mkdir(parents=True, exist_ok=True)
    tf.config.threading.set_intra_op_parallelism_threads(1)
    tf.config.threading.set_inter_op_parallelism_threads(1)
    digits_cases(out_dir)
    wine_case(out_dir)
    breast_cancer_case(out_dir)


if __name__ == "__main__":
    main()
