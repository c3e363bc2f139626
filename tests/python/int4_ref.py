"""Reference int4 weights of the bundled digits model, computed with numpy from the ONNX file.

Kinglet's int4 weights (runtime/FORMAT.md section 3.5) are symmetric per output channel:

    s[o]    = max_i |W[o, i]| / 7              (in float32, as the converter computes it)
    q[o, i] = clip(rint(W[o, i] / s[o]), -7, 7)  (the quotient in float64, rounded half to even)

This script reads the Gemm / MatMul weights of examples/digits/model.onnx with the onnx package
(W as [outputs][inputs]) and writes, per dense layer, the shape, the scales and the int4 values
to `digits_int4.json`; tests/tests/int4_digits.rs checks the packed blob's nibbles and weight
scales against it. (numpy's `rint` rounds half to even, IEEE 754 roundTiesToEven.)

Usage: python int4_ref.py [OUT_DIR]   (default: tests/fixtures/int4)
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import onnx
from onnx import numpy_helper

ROOT = Path(__file__).resolve().parents[2]


def dense_weights(model: onnx.ModelProto) -> list[np.ndarray]:
    """The weight matrices of the graph's Gemm and MatMul nodes, in node order, as [out][in]."""
    init = {t.name: numpy_helper.to_array(t) for t in model.graph.initializer}
    out = []
    for node in model.graph.node:
        if node.op_type not in ("Gemm", "MatMul"):
            continue
        w = init[node.input[1]].astype(np.float32)
        trans_b = any(a.name == "transB" and a.i == 1 for a in node.attribute)
        out.append(w if trans_b else w.T)
    return out


def int4(w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    m = np.abs(w).max(axis=1).astype(np.float32)
    s = np.where(m > 0, m / np.float32(7.0), np.float32(1.0)).astype(np.float32)
    q = np.clip(np.rint(w.astype(np.float64) / s.astype(np.float64)[:, None]), -7, 7)
    return s, q.astype(np.int8)


def main() -> None:
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "tests/fixtures/int4"
    out_dir.mkdir(parents=True, exist_ok=True)
    model = onnx.load(str(ROOT / "examples/digits/model.onnx"))
    layers = []
    for w in dense_weights(model):
        s, q = int4(w)
        layers.append(
            {
                "outputs": int(w.shape[0]),
                "inputs": int(w.shape[1]),
                "scales": [float(v) for v in s],
                "weights": [int(v) for v in q.reshape(-1)],
            }
        )
    (out_dir / "digits_int4.json").write_text(json.dumps({"layers": layers}) + "\n")


if __name__ == "__main__":
    main()
