"""numpy references for int8 calibration (`converter/src/quantise/`).

Writes `calib_cases.json` (into OUT_DIR, default tests/fixtures/calib), checked by
`tests/tests/calibration_refs.rs`:

* `percentile`: value sets (float32) and, for a list of percentiles p, numpy 2.4's
  `np.percentile(values.astype(np.float64), p)` (default method "linear", Hyndman & Fan (1996)
  definition 7), rounded to float32 once, as the converter does.
* `mse`: value sets and numpy's result of the grid search of the `mse` range method: for
  alpha = i / GRID, i = 1..GRID, the range [alpha * min(v_min, 0), alpha * max(v_max, 0)] (float32
  ends), quantised as the converter quantises (asymmetric int8, 255 steps, zero point rounded half
  away from zero; values divided by the float32 scale, rounded half to even, clamped to
  [-128, 127]; dequantised in float32), and the mean squared error over the values in float64.
  Chosen: the first alpha with the smallest error. (The search minimises the quantisation MSE over
  clipping thresholds, Nagel et al., 2021, "A White Paper on Neural Network Quantization", §3.4.)
* `noise`: one value set, a range, and the split of the squared error of quantising it into the
  part from values beyond the range (clipping) and within it (rounding).
* `bias`: a small float MLP (6 -> 5 ReLU -> 3), calibration rows, and the biases after bias
  correction (Nagel et al., 2019, "Data-Free Quantization Through Weight Equalization and Bias
  Correction", §4.2, empirical form): per layer, with symmetric per-row int8 weights
  W_q = s * clip(rint(W / s), -127, 127), s = max|W_row| / 127 (float32), the corrected bias is
  b + (W - W_q) mean(x), mean over the calibration rows of the layer's float input x.

Usage: python calib_ref.py [OUT_DIR]
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

sys.dont_write_bytecode = True
HERE = Path(__file__).resolve().parent
FIXTURES = HERE.parent / "fixtures" / "calib"
GRID = 100
PERCENTILES = [100.0, 99.99, 99.9, 99.0, 98.03, 75.0, 50.0, 1.0, 0.01]


def f32_list(a: np.ndarray) -> list[float]:
    """float32 values as the shortest decimals that read back as the same float32."""
    return [float(str(v)) for v in np.asarray(a, dtype=np.float32)]


def value_sets(rng: np.random.Generator) -> dict[str, np.ndarray]:
    laplace = rng.laplace(0.0, 1.0, 3000)
    laplace[:3] = [40.0, -35.0, 60.0]
    relu = np.maximum(rng.normal(-0.5, 1.0, 1500), 0.0)
    pixels = rng.integers(0, 17, 765).astype(np.float64)
    spike = rng.uniform(-1.0, 1.0, 750)
    spike[100] = 1e4
    return {
        "normal_2000": rng.normal(0.3, 2.0, 2000),
        "laplace_outliers_3000": laplace,
        "relu_1500": relu,
        "pixels_765": pixels,
        "uniform_spike_750": spike,
        "student_t_5000": rng.standard_t(2.0, 5000),
        "pair": np.array([-1.0, 3.0]),
        "big_10001": rng.normal(0.0, 1.0, 10001),
    }


def round_half_away(x: float) -> float:
    return float(np.sign(x) * np.floor(abs(x) + 0.5))


def activation_quant(lo32: np.float32, hi32: np.float32) -> tuple[np.float32, int]:
    lo = min(float(lo32), 0.0)
    hi = max(float(hi32), 0.0)
    if hi - lo < 1e-12:
        hi = lo + 1e-6
    scale = (hi - lo) / 255.0
    zp = int(min(127.0, max(-128.0, round_half_away(-128.0 - lo / scale))))
    return np.float32(scale), zp


def fake_quant(v32: np.ndarray, scale: np.float32, zp: int) -> np.ndarray:
    q = np.rint(v32 / scale)  # float32 division, half to even
    q = np.clip(q + np.float32(zp), -128, 127)
    return ((q - np.float32(zp)) * scale).astype(np.float32)


def mse_search(v: np.ndarray) -> dict:
    v32 = v.astype(np.float32)
    lo = min(float(v32.min()), 0.0)
    hi = max(float(v32.max()), 0.0)
    errors = []
    for i in range(1, GRID + 1):
        alpha = i / GRID
        lo_c, hi_c = np.float32(alpha * lo), np.float32(alpha * hi)
        scale, zp = activation_quant(lo_c, hi_c)
        d = v32.astype(np.float64) - fake_quant(v32, scale, zp).astype(np.float64)
        errors.append(float(np.mean(d * d)))
    best = int(np.argmin(errors))  # first of equal minima
    alpha = (best + 1) / GRID
    return {
        "step": best + 1,
        "min": f32_list([alpha * lo])[0],
        "max": f32_list([alpha * hi])[0],
        "mse": errors[best],
        "mse_minmax": errors[-1],
    }


def noise_case(rng: np.random.Generator) -> dict:
    v32 = rng.normal(0.0, 1.0, 400).astype(np.float32)
    v32[:4] = [9.0, -7.5, 6.0, 5.5]
    lo32, hi32 = np.float32(-3.0), np.float32(3.5)
    scale, zp = activation_quant(lo32, hi32)
    xq = fake_quant(v32, scale, zp).astype(np.float64)
    # The representable ends of the int8 tensor: (-128 - zp) * scale, (127 - zp) * scale.
    low = float((np.float32(-128 - zp)) * scale)
    high = float((np.float32(127 - zp)) * scale)
    x = v32.astype(np.float64)
    d2 = (x - xq) ** 2
    beyond = (x < low) | (x > high)
    return {
        "values": f32_list(v32),
        "min": float(lo32),
        "max": float(hi32),
        "clipped": int(beyond.sum()),
        "clip_noise": float(d2[beyond].sum()),
        "round_noise": float(d2[~beyond].sum()),
        "noise": float(d2.sum()),
        "signal": float((x * x).sum()),
    }


def weight_quant(w: np.ndarray) -> np.ndarray:
    """Symmetric per-row int8 weights, dequantised (float64)."""
    out = np.empty(w.shape, dtype=np.float64)
    for o, row in enumerate(w.astype(np.float32)):
        m = np.float32(np.max(np.abs(row)))
        s = m / np.float32(127.0) if m > 0 else np.float32(1.0)
        q = np.clip(np.rint(row.astype(np.float64) / float(s)), -127, 127)
        out[o] = q * float(s)
    return out


def bias_case(rng: np.random.Generator) -> dict:
    sizes = [6, 5, 3]
    layers = []
    for k in range(2):
        w = rng.normal(0.0, 0.6, (sizes[k + 1], sizes[k])).astype(np.float32)
        w[0, 0] = np.float32(2.5)  # one large weight: coarse steps on that row
        b = rng.normal(0.0, 0.3, sizes[k + 1]).astype(np.float32)
        layers.append((w, b, "relu" if k == 0 else "linear"))
    rows = rng.normal(0.5, 1.0, (40, sizes[0])).astype(np.float32)
    x = rows
    corrected = []
    for w, b, act in layers:
        mean = x.astype(np.float64).mean(axis=0)
        delta = (w.astype(np.float64) - weight_quant(w)) @ mean
        corrected.append([float(c) for c in b.astype(np.float64) + delta])
        z = x @ w.T + b
        x = np.maximum(z, 0).astype(np.float32) if act == "relu" else z.astype(np.float32)
    return {
        "layers": [
            {"weights": [f32_list(r) for r in w], "bias": f32_list(b), "activation": act}
            for w, b, act in layers
        ],
        "rows": [f32_list(r) for r in rows],
        "corrected_bias": corrected,
    }


def main() -> None:
    out = Path(sys.argv[1]) if len(sys.argv) > 1 else FIXTURES
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(20261203)
    sets = value_sets(rng)
    percentile = []
    mse = []
    for name, v in sets.items():
        v32 = v.astype(np.float32)
        got = f32_list([np.percentile(v32.astype(np.float64), p) for p in PERCENTILES])
        percentile.append({"set": name, "p": PERCENTILES, "expected": got})
        if name != "big_10001":
            mse.append({"set": name, **mse_search(v32)})
    doc = {
        "numpy": np.__version__,
        "grid": GRID,
        "sets": {name: f32_list(v) for name, v in sets.items()},
        "percentile": percentile,
        "mse": mse,
        "noise": noise_case(rng),
        "bias": bias_case(rng),
    }
    # One line per entry: value lists stay on one line each.
    lines = []
    for key, val in doc.items():
        if isinstance(val, dict) and key == "sets":
            inner = ",\n".join(f"  {json.dumps(k)}: {json.dumps(v)}" for k, v in val.items())
            lines.append(f" {json.dumps(key)}: {{\n{inner}\n }}")
        elif isinstance(val, list):
            inner = ",\n".join(f"  {json.dumps(v)}" for v in val)
            lines.append(f" {json.dumps(key)}: [\n{inner}\n ]")
        else:
            lines.append(f" {json.dumps(key)}: {json.dumps(val)}")
    (out / "calib_cases.json").write_text("{\n" + ",\n".join(lines) + "\n}\n")


if __name__ == "__main__":
    main()
