#!/usr/bin/env python3
"""Builds the PyTorch-exported fixtures under tests/fixtures/exporters/ (or the directory given):
nn.Linear stacks trained with PyTorch on scikit-learn bundled datasets and written by PyTorch's
own ONNX exporters, in the forms they take:

  torch_digits_opset9            TorchScript exporter, opset 9, constant folding on: Div (x/16),
                                 Flatten, Gemm(transB=1), Relu, Gemm(transB=1), Softmax
  torch_digits_opset13_nofold    TorchScript exporter, opset 13, constant folding off: a
                                 bias-free first layer becomes Transpose(weight) + MatMul; logits
  torch_wine_opset11_tied        TorchScript exporter, opset 11: two frozen hidden layers with
                                 equal parameters; the exporter's de-duplication of initializers
                                 writes the second's as Identity nodes; standardisation as Sub/Div
  torch_breast_cancer_opset17_nofold  logistic regression (Linear + Sigmoid), folding off
  torch_iris_dynamo_opset18      torch.export-based exporter (dynamo=True), opset 18,
                                 min-max scaling as Mul/Add
  torch_digits_dynamo_opset28    torch.export-based exporter at the newest opset the onnx package
                                 knows (28 for onnx 1.23): Flatten as Reshape(allowzero=1)
  torch_digits_view_opset13      x.view(x.size(0), -1): Reshape by a shape computed from Shape(x)
                                 (Gather, Unsqueeze, Concat)
  torch_digits_dynamo_unoptimized  torch.export-based exporter with optimize=False: Reshape by
                                 Shape(end=1), Squeeze, Reshape([-1]), Concat
  torch_iris_opsets/             one iris model at every opset from 9 to 28: the TorchScript
                                 exporter for 9..20, the torch.export-based one for 18..28
                                 (listed with their references in torch_iris_opsets.json)

Datasets and JSON layout: tests/python/exporter_common.py; the digits cases after the first
store no rows ("inputs_from": the same held-out and calibration rows). Each JSON records PyTorch's own output
on the held-out rows (computed here) and onnx.reference.ReferenceEvaluator's on the export.

This script needs PyTorch, which the reference venv (tests/python/requirements.txt) does not
have, and CI never installs it: the .onnx and .json files are committed. The reference check
(check_fixtures.py, run by run_all.sh) does not rerun this script; it re-evaluates the committed
.onnx files with ReferenceEvaluator and compares with the committed references
(check_exporter_refs.py).

Made with: torch 2.15.0 (CPU build from PyPI), onnxscript 0.7.2, onnx 1.23.2, numpy 2.4.6,
scikit-learn 1.9.1, Python 3.11; the same versions regenerate the files identically. Command:

  python3 -m venv /work/venv-torch
  /work/venv-torch/bin/pip install torch==2.15.0 onnxscript==0.7.2 onnx==1.23.2 numpy==2.4.6 scikit-learn==1.9.1
  /work/venv-torch/bin/python tests/python/make_torch_cases.py [OUT_DIR]
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import contextlib  # noqa: E402
import io  # noqa: E402
import json  # noqa: E402
import sys  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import onnx  # noqa: E402
import torch  # noqa: E402
from torch import nn  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from exporter_common import REF_SOURCE, default_dir, dense_params, g9_list, reference, save, split  # noqa: E402

TORCH = f"PyTorch {torch.__version__.split('+')[0]}"
NEWEST = onnx.defs.onnx_opset_version()


def seed():
    torch.manual_seed(0)
    torch.set_num_threads(1)
    torch.use_deterministic_algorithms(True)


class Scaled(nn.Module):
    """`body` behind a fixed input scaling written as tensor arithmetic, then an output function."""

    def __init__(self, body, scaling, head):
        super().__init__()
        self.body, self.scaling, self.head = body, scaling, head

    def logits(self, x):
        return self.body(self.scaling(x))

    def forward(self, x):
        z = self.logits(x)
        return self.head(z) if self.head is not None else z


class Standardise(nn.Module):
    def __init__(self, x):
        super().__init__()
        self.register_buffer("mean", torch.tensor(x.mean(axis=0), dtype=torch.float32))
        self.register_buffer("std", torch.tensor(x.std(axis=0) + 1e-6, dtype=torch.float32))

    def forward(self, x):
        return (x - self.mean) / self.std


class MinMax(nn.Module):
    def __init__(self, x):
        super().__init__()
        lo, hi = x.min(axis=0), x.max(axis=0)
        scale = 1.0 / np.where(hi > lo, hi - lo, 1.0)
        self.register_buffer("scale", torch.tensor(scale, dtype=torch.float32))
        self.register_buffer("offset", torch.tensor(-lo * scale, dtype=torch.float32))

    def forward(self, x):
        return x * self.scale + self.offset


class DivideBy(nn.Module):
    def __init__(self, c):
        super().__init__()
        self.c = c

    def forward(self, x):
        return x / self.c


class ViewBatch(nn.Module):
    """`x.view(x.size(0), -1)`: the flatten many PyTorch models write by hand."""

    def forward(self, x):
        return x.view(x.size(0), -1)


class Tied(nn.Module):
    """Linear(13, 16), then two frozen 16 -> 16 layers with equal parameters (fixed random
    features: h2 starts as a copy of h1 and neither is trained), then 16 -> 3. The TorchScript
    exporter de-duplicates equal initializers and writes the second layer's as Identity nodes."""

    def __init__(self):
        super().__init__()
        self.inp = nn.Linear(13, 16)
        self.h1 = nn.Linear(16, 16)
        self.h2 = nn.Linear(16, 16)
        with torch.no_grad():
            self.h2.weight.copy_(self.h1.weight)
            self.h2.bias.copy_(self.h1.bias)
        for p in (*self.h1.parameters(), *self.h2.parameters()):
            p.requires_grad_(False)
        self.out = nn.Linear(16, 3)

    def forward(self, x):
        x = torch.relu(self.inp(x))
        x = torch.relu(self.h1(x))
        x = torch.relu(self.h2(x))
        return self.out(x)


def train(model: Scaled, x, y, epochs, lr, binary=False):
    xt = torch.tensor(x, dtype=torch.float32)
    yt = torch.tensor(y)
    opt = torch.optim.Adam([p for p in model.parameters() if p.requires_grad], lr=lr)
    loss_fn = nn.BCEWithLogitsLoss() if binary else nn.CrossEntropyLoss()
    target = yt.float().unsqueeze(1) if binary else yt
    model.train()
    for _ in range(epochs):
        opt.zero_grad()
        loss = loss_fn(model.logits(xt), target)
        loss.backward()
        opt.step()
    model.eval()
    return model


def run(model, x):
    with torch.no_grad():
        return model(torch.tensor(x, dtype=torch.float32)).numpy()


def export(model, example, opset, exporter, fold=True, optimize=True):
    """The ONNX model as PyTorch's exporter writes it, batch dimension dynamic."""
    example = torch.tensor(example, dtype=torch.float32)
    with warnings.catch_warnings(), contextlib.redirect_stdout(io.StringIO()):
        warnings.simplefilter("ignore")
        if exporter == "torchscript":
            f = io.BytesIO()
            torch.onnx.export(model, (example,), f, input_names=["input"], output_names=["output"],
                              dynamic_axes={"input": {0: "N"}, "output": {0: "N"}}, opset_version=opset,
                              do_constant_folding=fold, dynamo=False)
            return onnx.load_from_string(f.getvalue())
        batch = torch.export.Dim("N", min=2)
        prog = torch.onnx.export(model, (example,), input_names=["input"], output_names=["output"],
                                 dynamic_shapes=({0: batch},), opset_version=opset, dynamo=True,
                                 optimize=optimize, verbose=False)
        m = prog.model_proto
        # The exporter records each node's Python stack trace (file paths of this machine) as
        # node metadata: dropped, so the files do not depend on where they were made.
        for n in m.graph.node:
            del n.metadata_props[:]
        for v in (*m.graph.value_info, *m.graph.input, *m.graph.output):
            del v.metadata_props[:]
        return m


def ops(m):
    return [n.op_type for n in m.graph.node]


def meta(pattern, dataset, kind, params, scaler, labels, **extra):
    d = {"pattern": pattern, "dataset": dataset, "output_kind": kind, "params": params,
         "scaler_kind": scaler, "labels": [str(v) for v in labels], "exporter": TORCH}
    d.update(extra)
    return d


def digits_cases(out_dir):
    X_train, X_test, y_train, y_test = split("load_digits")
    img_train, img_test = X_train.reshape(-1, 8, 8), X_test.reshape(-1, 8, 8)

    seed()
    body = nn.Sequential(nn.Flatten(), nn.Linear(64, 32), nn.ReLU(), nn.Linear(32, 10))
    model = train(Scaled(body, DivideBy(16.0), nn.Softmax(dim=1)), img_train, y_train, 300, 0.01)
    m = export(model, img_test[:2], 9, "torchscript", fold=True)
    assert ops(m) == ["Constant", "Div", "Flatten", "Gemm", "Relu", "Gemm", "Softmax"], ops(m)
    save(out_dir, "torch_digits_opset9", m,
         meta("PyTorch TorchScript exporter, opset 9, folding on: Div, Flatten, Gemm(transB=1), Relu, Gemm, Softmax",
              "load_digits", "softmax", dense_params((64, 32), (32, 10)), "Uniform", range(10), input_shape=[None, 8, 8]),
         X_test, y_test, X_train, run(model, img_test), f"{TORCH} forward")

    seed()
    body = nn.Sequential(nn.Flatten(), nn.Linear(64, 32, bias=False), nn.ReLU(), nn.Linear(32, 10))
    model = train(Scaled(body, DivideBy(16.0), None), img_train, y_train, 300, 0.01)
    m = export(model, img_test[:2], 13, "torchscript", fold=False)
    assert "Transpose" in ops(m) and "MatMul" in ops(m), ops(m)
    save(out_dir, "torch_digits_opset13_nofold", m,
         meta("PyTorch TorchScript exporter, opset 13, folding off: Transpose(weight) + MatMul, Gemm, logits",
              "load_digits", "logits", 64 * 32 + dense_params((32, 10)), "Uniform", range(10), input_shape=[None, 8, 8],
              bias_free_layers=1, inputs_from="torch_digits_opset9"),
         X_test, y_test, X_train, run(model, img_test), f"{TORCH} forward", store_rows=False)

    seed()
    body = nn.Sequential(nn.Flatten(), nn.Linear(64, 32), nn.ReLU(), nn.Linear(32, 10))
    model = train(Scaled(body, DivideBy(16.0), nn.Softmax(dim=1)), img_train, y_train, 300, 0.01)
    m = export(model, img_test[:2], NEWEST, "dynamo")
    assert "Reshape" in ops(m) and m.opset_import[0].version == NEWEST, (ops(m), m.opset_import)
    save(out_dir, f"torch_digits_dynamo_opset{NEWEST}", m,
         meta(f"PyTorch torch.export-based exporter, opset {NEWEST}: Div, Reshape(allowzero=1), Gemm, Relu, Gemm, Softmax",
              "load_digits", "softmax", dense_params((64, 32), (32, 10)), "Uniform", range(10), input_shape=[None, 8, 8],
              inputs_from="torch_digits_opset9"),
         X_test, y_test, X_train, run(model, img_test), f"{TORCH} forward", store_rows=False)


    seed()
    body = nn.Sequential(ViewBatch(), nn.Linear(64, 32), nn.ReLU(), nn.Linear(32, 10))
    model = train(Scaled(body, DivideBy(16.0), nn.Softmax(dim=1)), img_train, y_train, 300, 0.01)
    m = export(model, img_test[:2], 13, "torchscript", fold=True)
    assert ops(m)[:6] == ["Constant", "Div", "Shape", "Constant", "Gather", "Constant"], ops(m)
    save(out_dir, "torch_digits_view_opset13", m,
         meta("PyTorch TorchScript exporter, opset 13, x.view(x.size(0), -1): Reshape by Concat(Unsqueeze(Gather(Shape(x), 0)), [-1])",
              "load_digits", "softmax", dense_params((64, 32), (32, 10)), "Uniform", range(10), input_shape=[None, 8, 8],
              inputs_from="torch_digits_opset9"),
         X_test, y_test, X_train, run(model, img_test), f"{TORCH} forward", store_rows=False)
    m = export(model, img_test[:2], 20, "dynamo", optimize=False)
    assert "Shape" in ops(m) and "Squeeze" in ops(m), ops(m)
    save(out_dir, "torch_digits_dynamo_unoptimized", m,
         meta("PyTorch torch.export-based exporter, opset 20, optimize=False: Reshape by Concat(Reshape(Squeeze(Shape(x, end=1)), [-1]), [64])",
              "load_digits", "softmax", dense_params((64, 32), (32, 10)), "Uniform", range(10), input_shape=[None, 8, 8],
              inputs_from="torch_digits_opset9"),
         X_test, y_test, X_train, run(model, img_test), f"{TORCH} forward", store_rows=False)


def wine_case(out_dir):
    X_train, X_test, y_train, y_test = split("load_wine")
    seed()
    model = train(Scaled(Tied(), Standardise(X_train), nn.Softmax(dim=1)), X_train, y_train, 300, 0.01)
    m = export(model, X_test[:2], 11, "torchscript", fold=True)
    assert ops(m).count("Identity") == 2, ops(m)
    save(out_dir, "torch_wine_opset11_tied", m,
         meta("PyTorch TorchScript exporter, opset 11: Sub/Div standardisation, equal frozen layers as Identity of initializers",
              "load_wine", "softmax", dense_params((13, 16), (16, 16), (16, 16), (16, 3)), "Standardise", range(3)),
         X_test, y_test, X_train, run(model, X_test), f"{TORCH} forward")


def breast_cancer_case(out_dir):
    X_train, X_test, y_train, y_test = split("load_breast_cancer")
    seed()
    model = train(Scaled(nn.Linear(30, 1), Standardise(X_train), nn.Sigmoid()), X_train, y_train, 400, 0.01,
                  binary=True)
    m = export(model, X_test[:2], 17, "torchscript", fold=False)
    save(out_dir, "torch_breast_cancer_opset17_nofold", m,
         meta("PyTorch TorchScript exporter, opset 17, folding off: Sub/Div, Gemm(transB=1), Sigmoid (logistic regression)",
              "load_breast_cancer", "sigmoid", dense_params((30, 1)), "Standardise", range(2)),
         X_test, y_test, X_train, run(model, X_test), f"{TORCH} forward")


def iris_cases(out_dir):
    X_train, X_test, y_train, y_test = split("load_iris")
    seed()
    body = nn.Sequential(nn.Linear(4, 8), nn.ReLU(), nn.Linear(8, 3))
    model = train(Scaled(body, MinMax(X_train), nn.Softmax(dim=1)), X_train, y_train, 300, 0.02)
    m = export(model, X_test[:2], 18, "dynamo")
    save(out_dir, "torch_iris_dynamo_opset18", m,
         meta("PyTorch torch.export-based exporter, opset 18: Mul/Add min-max scaling, Gemm, Relu, Gemm, Softmax",
              "load_iris", "softmax", dense_params((4, 8), (8, 3)), "MinMax", range(3)),
         X_test, y_test, X_train, run(model, X_test), f"{TORCH} forward")

    # The same model at every opset: the TorchScript exporter up to 20, the other from 18.
    sub = out_dir / "torch_iris_opsets"
    sub.mkdir(exist_ok=True)
    fw = run(model, X_test)
    models = []
    for exporter, opsets in (("torchscript", range(9, 21)), ("dynamo", range(18, NEWEST + 1))):
        for op in opsets:
            m = export(model, X_test[:2], op, exporter)
            assert m.opset_import[0].version == op
            onnx.checker.check_model(m)
            name = f"{exporter}_opset{op}.onnx"
            (sub / name).write_bytes(m.SerializeToString())
            ref = reference(m, X_test)
            models.append({"model": f"torch_iris_opsets/{name}", "opset": op, "exporter": exporter,
                           "ops": ops(m), "expected": g9_list(ref)})
            print(f"torch_iris_opsets/{name}: {' '.join(ops(m))}; vs PyTorch {np.max(np.abs(ref - fw)):.2e}")
    doc = meta("one model exported at every opset", "load_iris", "softmax", dense_params((4, 8), (8, 3)), "MinMax",
               range(3))
    doc.update({"models": models, "heldout_labels": [int(v) for v in y_test],
                "framework": {"source": f"{TORCH} forward", "rows": g9_list(fw)},
                "inputs_from": "torch_iris_dynamo_opset18", "expected_source": REF_SOURCE})
    (out_dir / "torch_iris_opsets.json").write_text(json.dumps(doc, separators=(",", ":")) + "\n")


def main():
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else default_dir()
    out_dir.mkdir(parents=True, exist_ok=True)
    digits_cases(out_dir)
    wine_case(out_dir)
    breast_cancer_case(out_dir)
    iris_cases(out_dir)


if __name__ == "__main__":
    main()
