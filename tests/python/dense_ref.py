"""References for softmax and for one int8 dense layer with integer-only requantisation.

* softmax: numpy in float64 with the maximum logit subtracted first (the standard numerically stable
  form, p_i = exp(z_i - max z) / sum_j exp(z_j - max z)); logits are float32 values.
* dense int8: acc[o] = bias[o] + sum_i w[o, i] * x[i] in numpy int64 (asserted to fit in int32, as the
  runtime accumulates in i32), then `requant_ref.requantize_np` (Jacob et al., 2018; gemmlowp rounding)
  with act_min = out_zero_point if relu else -128, act_max = 127. The bias already includes the folded
  input zero point term. Each case is cross-checked against the plain-Python-int requantiser.

Writes `softmax_cases.json` and `dense_int8_cases.json` into the output directory (default: tests/fixtures).

Usage: python dense_ref.py [OUT_DIR]
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

sys.dont_write_bytecode = True  # keep the source tree free of __pycache__
sys.path.insert(0, str(Path(__file__).resolve().parent))
import requant_ref  # noqa: E402

SEED = 7
DEFAULT_OUT = Path(__file__).resolve().parent.parent / "fixtures"
F32 = np.float32


def softmax64(logits: np.ndarray) -> np.ndarray:
    z = np.asarray(logits, dtype=np.float64)
    e = np.exp(z - z.max())
    return e / e.sum()


def softmax_cases(rng) -> list[dict]:
    logit_sets: list[np.ndarray] = []
    for n in (1, 2, 3, 10, 20):  # equal logits
        logit_sets.append(np.full(n, rng.uniform(-5, 5), dtype=F32))
    logit_sets.append(np.zeros(4, dtype=F32))
    for n in (2, 4, 10, 20):  # large spread (+-80)
        v = rng.uniform(-80.0, 80.0, size=n).astype(F32)
        v[0], v[-1] = F32(80.0), F32(-80.0)
        logit_sets.append(v)
    for n in (2, 5, 10, 16):  # one dominant
        v = rng.normal(0.0, 1.0, size=n).astype(F32)
        v[int(rng.integers(0, n))] = F32(rng.uniform(15.0, 60.0))
        logit_sets.append(v)
    logit_sets.append(np.array([80.0, -80.0], dtype=F32))
    logit_sets.append(np.array([-80.0, -80.0, -79.0], dtype=F32))
    logit_sets.append(np.array([1e-7, 0.0, -1e-7], dtype=F32))
    while len(logit_sets) < 50:  # random sizes 1..20 and scales
        n = int(rng.integers(1, 21))
        scale = float(10.0 ** rng.uniform(-1.0, 1.5))
        logit_sets.append((rng.normal(0.0, 1.0, size=n) * scale).astype(F32))
    cases = []
    for v in logit_sets:
        p = softmax64(v)
        assert abs(p.sum() - 1.0) < 1e-12 and np.all(p >= 0.0)
        cases.append({"logits": [float(t) for t in v], "probs": [float(t) for t in p]})
    return cases


def dense_case(rng, n: int, m: int, *, extreme: bool = False, relu: bool | None = None) -> dict:
    if extreme:
        x = np.full(n, -128, dtype=np.int64)
        w = np.full((m, n), -128, dtype=np.int64)
        bias = rng.integers(-(1 << 20), 1 << 20, size=m, dtype=np.int64)
    else:
        x = rng.integers(-128, 127, size=n, endpoint=True, dtype=np.int64)
        w = rng.integers(-128, 127, size=(m, n), endpoint=True, dtype=np.int64)
        # A folded zero point term of the form -z_in * sum_i w[o, i], plus a random bias.
        z_in = int(rng.integers(-128, 127, endpoint=True))
        bias = rng.integers(-5000, 5000, size=m, dtype=np.int64) - z_in * w.sum(axis=1)
    acc = bias + w @ x
    assert np.all((acc >= requant_ref.INT32_MIN) & (acc <= requant_ref.INT32_MAX)), "accumulator overflows i32"
    assert np.all((bias >= requant_ref.INT32_MIN) & (bias <= requant_ref.INT32_MAX))
    # Per-output-channel real multipliers chosen so outputs spread over the int8 range.
    spread = np.maximum(np.abs(acc).astype(np.float64), 1.0)
    reals = rng.uniform(5.0, 140.0, size=m) / spread
    mult_shift = [requant_ref.decompose_multiplier(float(r)) for r in reals]
    multiplier = np.array([q for q, _ in mult_shift], dtype=np.int64)
    shift = np.array([s for _, s in mult_shift], dtype=np.int64)
    assert np.all((shift >= -31) & (shift <= 31))
    if relu is None:
        relu = bool(rng.random() < 0.5)
    # Typical zero points: ReLU outputs sit at the low end of the range, others near the middle.
    z = int(rng.integers(-128, 0, endpoint=True)) if relu else int(rng.integers(-64, 64, endpoint=True))
    lo = z if relu else -128
    expected = requant_ref.requantize_np(acc, multiplier, shift, z, lo, 127)
    for o in range(m):
        assert requant_ref.requantize_py(int(acc[o]), int(multiplier[o]), int(shift[o]), z, lo, 127) == int(expected[o])
    return {
        "inputs": n,
        "outputs": m,
        "x": [int(t) for t in x],
        "weights": [int(t) for t in w.reshape(-1)],
        "bias": [int(t) for t in bias],
        "multiplier": [int(t) for t in multiplier],
        "shift": [int(t) for t in shift],
        "out_zero_point": z,
        "relu": relu,
        "expected": [int(t) for t in expected],
    }


def dense_cases(rng) -> list[dict]:
    shapes = [(1, 1), (5, 3), (9, 17), (32, 64), (10, 100)]  # (inputs, outputs) = layers 1x1, 3x5, 17x9, 64x32, 100x10
    cases = []
    for n, m in shapes:  # each shape with and without ReLU
        cases.append(dense_case(rng, n, m, relu=False))
        cases.append(dense_case(rng, n, m, relu=True))
    for n, m in [(1, 1), (9, 17), (64, 32), (100, 10)]:  # extreme values: all -128 inputs and weights
        cases.append(dense_case(rng, n, m, extreme=True))
    for n, m in [(17, 9), (3, 5), (64, 32), (10, 100), (2, 7), (30, 4)]:
        cases.append(dense_case(rng, n, m))
    assert len(cases) == 20
    return cases


def write_json(path: Path, obj) -> None:
    with open(path, "w") as f:
        json.dump(obj, f, indent=1)
        f.write("\n")


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else DEFAULT_OUT
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(SEED)
    sm = softmax_cases(rng)
    dn = dense_cases(rng)
    write_json(out / "softmax_cases.json", sm)
    write_json(out / "dense_int8_cases.json", dn)
    print(f"softmax_cases.json: {len(sm)} cases; dense_int8_cases.json: {len(dn)} cases -> {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
