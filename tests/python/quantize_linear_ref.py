"""Reference for Kinglet's float -> int8 (and int16) input quantisation, checked against ONNX QuantizeLinear.

Reference: the ONNX operator QuantizeLinear (opset 21, https://onnx.ai/onnx/operators/onnx__QuantizeLinear.html):
    y = saturate(round_half_to_even(x / y_scale) + y_zero_point), int8 output, computed in float32,
run through the onnx package's `onnx.reference.ReferenceEvaluator` on a one-node model built with
`onnx.helper`. An independent numpy float32 implementation is asserted to agree on every row.

Note: the reference evaluator casts `rint(x / scale)` to int32 before clipping, which is undefined for
|x / scale| >= 2^31, so every case here keeps |x / scale| below 1e9 (still far outside int8 range).

Writes `quantize_linear_cases.csv` (x,scale,zero_point,expected) into the output directory (default:
tests/fixtures), and `quantize_linear_i16_cases.csv` (x,scale,expected): the same operator with an
int16 output and zero point 0, the symmetric int16 input tensor of format version 7
(runtime/FORMAT.md §3.6; QuantizeLinear takes int16 outputs from opset 21). Float values are written as repr(float(np.float32(v))), which round-trips float32.

Usage: python quantize_linear_ref.py [OUT_DIR]
"""

from __future__ import annotations

import csv
import sys
from collections import OrderedDict
from pathlib import Path

import numpy as np
import onnx
from onnx import TensorProto, helper
from onnx.reference import ReferenceEvaluator

SEED = 19
OPSET = 21
DEFAULT_OUT = Path(__file__).resolve().parent.parent / "fixtures"
F32 = np.float32


def build_model(out_type=TensorProto.INT8) -> onnx.ModelProto:
    node = helper.make_node("QuantizeLinear", ["x", "scale", "zero_point"], ["y"], name="quantize_input")
    graph = helper.make_graph(
        [node],
        "quantize_linear_reference",
        [
            helper.make_tensor_value_info("x", TensorProto.FLOAT, ["n"]),
            helper.make_tensor_value_info("scale", TensorProto.FLOAT, []),
            helper.make_tensor_value_info("zero_point", out_type, []),
        ],
        [helper.make_tensor_value_info("y", out_type, ["n"])],
    )
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid("", OPSET)])
    onnx.checker.check_model(model)
    return model


def quantize_np(x: np.ndarray, scale: np.float32, zero_point: int) -> np.ndarray:
    """Independent implementation: float32 division, round half to even, add zero point, saturate."""
    q = np.rint(np.asarray(x, dtype=F32) / F32(scale)).astype(np.float64)
    return np.clip(q + zero_point, -128, 127).astype(np.int64)


def build_groups(rng) -> "OrderedDict[tuple[float, int], list[float]]":
    groups: "OrderedDict[tuple[float, int], list[float]]" = OrderedDict()

    def add(scale, zp, xs):
        s = F32(scale)
        key = (float(s), int(zp))
        lst = groups.setdefault(key, [])
        for v in xs:
            v32 = F32(v)
            ratio = float(v32) / float(s)
            assert abs(ratio) < 1e9, (v, scale)
            lst.append(float(v32))

    # Exact ties with power-of-two scales: x = (k + 0.5) * scale exactly; both signs.
    for scale, zp in ((1.0, 0), (0.5, 3), (0.125, -7), (2.0**-7, 0), (4.0, -128), (2.0**-12, 127), (0.25, 0)):
        ks = list(range(-6, 6)) + [-130, -129, -128, -127, 126, 127, 128] + list(rng.integers(-300, 300, size=6))
        add(scale, zp, [(int(k) + 0.5) * scale for k in ks])
    # Ties with non-power-of-two scales, kept only when the float32 division is exactly k + 0.5.
    for scale, zp in ((0.1, 0), (0.0392156862745098, -1), (3.0, 10), (0.75, -20)):
        s = F32(scale)
        xs = []
        for k in list(range(-40, 40)):
            x = F32((k + 0.5) * float(s))
            if F32(x / s) == F32(k + 0.5):
                xs.append(float(x))
        add(scale, zp, xs[:30])

    # Saturation: values far beyond the int8 range, with extreme and ordinary zero points.
    for scale, zp in ((0.02, 0), (0.02, 127), (0.02, -128), (1.5, 50), (1.5, -50)):
        xs = [1e3, -1e3, 2.55, -2.56, 2.54, -2.58, 3.4e4, -3.4e4, 127 * scale, -128 * scale, 128 * scale, -129 * scale]
        xs += list(rng.uniform(-10.0, 10.0, size=10) * scale * 100)
        add(scale, zp, xs)

    # Tiny scales (inputs scaled so that |x / scale| stays below 1e9).
    for scale, zp in ((1e-6, 0), (1.5e-8, -3), (2.0**-20, 5), (3.7e-12, 0), (1e-30, -100)):
        xs = list(rng.normal(0.0, 80.0, size=16) * scale) + [0.0, -0.0, scale * 0.5, -scale * 0.5, scale * 1e5, -scale * 1e5]
        add(scale, zp, xs)

    # Random scales and zero points.
    for _ in range(12):
        scale = float(10.0 ** rng.uniform(-4.0, 1.0))
        zp = int(rng.integers(-128, 127, endpoint=True))
        xs = list(rng.uniform(-200.0, 200.0, size=24) * scale)
        add(scale, zp, xs)
    return groups


def build_groups_i16(rng) -> "OrderedDict[float, list[float]]":
    """Cases for the symmetric int16 quantisation (zero point 0)."""
    groups: "OrderedDict[float, list[float]]" = OrderedDict()

    def add(scale, xs):
        s = F32(scale)
        lst = groups.setdefault(float(s), [])
        for v in xs:
            v32 = F32(v)
            assert abs(float(v32) / float(s)) < 1e9, (v, scale)
            lst.append(float(v32))

    # Exact ties with power-of-two scales, around zero and the int16 ends.
    for scale in (1.0, 2.0**-8, 2.0**-15, 0.5, 2.0**3):
        ks = list(range(-5, 5)) + [-32770, -32769, -32768, -32767, 32766, 32767, 32768] + list(rng.integers(-40000, 40000, size=8))
        add(scale, [(int(k) + 0.5) * scale for k in ks])
    # Saturation and the ends themselves.
    for scale in (0.0179, 1e-3, 3.0):
        add(scale, [32767 * scale, -32768 * scale, 32768 * scale, -32769 * scale, 1e6 * scale, -1e6 * scale, 0.0, -0.0])
    # Random scales (the digits example's is about 0.018).
    for _ in range(12):
        scale = float(10.0 ** rng.uniform(-5.0, 1.0))
        add(scale, list(rng.uniform(-40000.0, 40000.0, size=24) * scale))
    return groups


def write_i16(out: Path, rng) -> int:
    sess = ReferenceEvaluator(build_model(TensorProto.INT16))
    rows = []
    for scale, xs in build_groups_i16(rng).items():
        x = np.array(xs, dtype=F32)
        (y,) = sess.run(None, {"x": x, "scale": np.array(scale, dtype=F32), "zero_point": np.array(0, dtype=np.int16)})
        mine = np.clip(np.rint(x / F32(scale)).astype(np.float64), -32768, 32767).astype(np.int64)
        if not np.array_equal(y.astype(np.int64), mine):
            bad = int(np.nonzero(y.astype(np.int64) != mine)[0][0])
            raise AssertionError(f"int16: numpy and ReferenceEvaluator disagree at x={xs[bad]!r} scale={scale!r}")
        for xi, yi in zip(x, y):
            rows.append((repr(float(xi)), repr(float(F32(scale))), int(yi)))
    with open(out / "quantize_linear_i16_cases.csv", "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["x", "scale", "expected"])
        w.writerows(rows)
    return len(rows)


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else DEFAULT_OUT
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(SEED)
    sess = ReferenceEvaluator(build_model())
    rows = []
    ties = 0
    for (scale, zp), xs in build_groups(rng).items():
        x = np.array(xs, dtype=F32)
        (y,) = sess.run(None, {"x": x, "scale": np.array(scale, dtype=F32), "zero_point": np.array(zp, dtype=np.int8)})
        mine = quantize_np(x, F32(scale), zp)
        if not np.array_equal(y.astype(np.int64), mine):
            bad = int(np.nonzero(y.astype(np.int64) != mine)[0][0])
            raise AssertionError(f"numpy and ReferenceEvaluator disagree at x={xs[bad]!r} scale={scale!r} zp={zp}")
        ratio = x / F32(scale)
        ties += int(np.sum(np.abs(ratio - np.floor(ratio)) == 0.5))
        for xi, yi in zip(x, y):
            rows.append((repr(float(xi)), repr(float(F32(scale))), zp, int(yi)))
    with open(out / "quantize_linear_cases.csv", "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["x", "scale", "zero_point", "expected"])
        w.writerows(rows)
    print(f"quantize_linear_cases.csv: {len(rows)} rows ({ties} exact ties) -> {out}")
    n = write_i16(out, np.random.default_rng(SEED + 1))
    print(f"quantize_linear_i16_cases.csv: {n} rows -> {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
