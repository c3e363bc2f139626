"""What it would take for every tensor of the digits example to reach 30 dB SQNR (issue 15).

A numpy simulation of the int8 model ("fake quantisation": every tensor quantised and dequantised
in float64), run on the held-out rows of examples/digits. Its first case is the model the
converter packs today (`--range minmax`), so `tests/tests/calibration_digits.rs` can check the
simulation against the measured report (each tensor within 0.3 dB); the other cases change one
thing each, which the format cannot express today:

* the input tensor quantised to int16 instead of int8 (one scale, over the input's known domain:
  the raw pixels 0..16 through the scaler, per feature, the widest end of any feature);
* the same input quantised per feature to int8, each feature over its own domain (the first
  layer would then need a scale per input: not an integer kernel with int8 weights);
* the input tensor as `kinglet pack --input-tensor int16` quantises it (format version 7):
  symmetric int16, zero point 0, over the same domain (the cases `calibration_digits.rs`
  checks against the measured int16-input packs, each tensor within 0.3 dB);
* the hidden and output ranges of the calibration rows widened by a factor ("headroom";
  common practice, no source), or taken from the held-out rows themselves (a bound).

Quantisation as the converter does it (converter/src/quantise/): asymmetric 8-bit (or 16-bit)
activations over [min(lo, 0), max(hi, 0)], 2^bits - 1 steps, zero point rint(-lo / s), values
rint(x / s) + z clamped; symmetric per-output-channel int8 weights, s = max|W_row| / 127, W_q =
s * clip(rint(W / s), -127, 127); biases kept in float (the converter's int32 biases round to
1 / (s_in s_w), far below these noise levels). SQNR = 10 log10(sum f^2 / sum (f - q)^2) over every
value of the tensor, f the float model's tensor (float64 here), q the simulated one.

Writes `digits_sqnr_bound.json` (into OUT_DIR, default tests/fixtures/calib).

Usage: python sqnr_bound_ref.py [OUT_DIR]
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import onnx
from onnx import helper, numpy_helper

sys.dont_write_bytecode = True
HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
FIXTURES = HERE.parent / "fixtures" / "calib"
DIGITS = ROOT / "examples" / "digits"
PIXEL_MAX = 16.0  # load_digits' pixels are whole numbers 0..16 (scikit-learn's documentation)


def load_model():
    m = onnx.load(str(DIGITS / "model.onnx"))
    init = {i.name: numpy_helper.to_array(i).astype(np.float64) for i in m.graph.initializer}
    scaler = next(n for n in m.graph.node if n.op_type == "Scaler")
    att = {a.name: helper.get_attribute_value(a) for a in scaler.attribute}
    offset = np.array(att["offset"], np.float64)
    scale = np.array(att["scale"], np.float64)
    weights = [init["coefficient"], init["coefficient1"], init["coefficient2"]]
    biases = [init["intercepts"][0], init["intercepts1"][0], init["intercepts2"][0]]
    return offset, scale, weights, biases


def rows(name: str) -> np.ndarray:
    a = np.loadtxt(DIGITS / name, delimiter=",", skiprows=1)
    return a[:, :64]


def forward(x, offset, scale, weights, biases):
    """The float model's tensors: scaled input, then each layer's output."""
    h = (x - offset) * scale
    out = [h]
    for k, (w, b) in enumerate(zip(weights, biases)):
        h = h @ w + b
        if k < len(weights) - 1:
            h = np.maximum(h, 0.0)
        out.append(h)
    return out


def fake_quant(x, lo, hi, bits):
    """Asymmetric quantisation over [min(lo, 0), max(hi, 0)] (scalars or per-feature arrays)."""
    lo = np.minimum(lo, 0.0)
    hi = np.maximum(hi, 0.0)
    n = 2.0**bits - 1
    s = (hi - lo) / n
    s = np.where(s == 0, 1.0, s)
    z = np.rint(-lo / s)
    return (np.clip(np.rint(x / s) + z, 0, n) - z) * s


def weights_q(w):
    """Symmetric per-output-channel int8 (ONNX MatMul layout: columns are outputs)."""
    s = np.abs(w).max(axis=0) / 127.0
    s = np.where(s == 0, 1.0, s)
    return np.clip(np.rint(w / s), -127, 127) * s


def simulate(x, model, input_q, ranges):
    offset, scale, weights, biases = model
    h = input_q((x - offset) * scale)
    out = [h]
    for k, (w, b) in enumerate(zip(weights, biases)):
        h = h @ weights_q(w) + b
        if k < len(weights) - 1:
            h = np.maximum(h, 0.0)
        h = fake_quant(h, *ranges[k], 8)
        out.append(h)
    return out


def fake_quant_symmetric16(x, lo, hi):
    """Symmetric int16 over [lo, hi], as `kinglet pack --input-tensor int16` (FORMAT.md §3.6):
    zero point 0, s = max(|lo|, |hi|) / 32767, values clip(rint(x / s), -32768, 32767) * s."""
    s = max(abs(lo), abs(hi)) / 32767.0
    return np.clip(np.rint(x / s), -32768, 32767) * s


def sqnr_db(f, q):
    return float(10.0 * np.log10((f**2).sum() / ((f - q) ** 2).sum()))


def main() -> None:
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else FIXTURES
    model = load_model()
    offset, scale, _, _ = model
    calib, held = rows("calibration.csv"), rows("heldout.csv")
    f_cal = forward(calib, *model)
    f_held = forward(held, *model)
    # The input's known domain, per feature: raw pixels 0..16 through the scaler.
    dom_lo = np.minimum((0.0 - offset) * scale, (PIXEL_MAX - offset) * scale)
    dom_hi = np.maximum((0.0 - offset) * scale, (PIXEL_MAX - offset) * scale)
    cal_in = (f_cal[0].min(), f_cal[0].max())

    def ranges(tensors, widen=1.0):
        return [(t.min() * widen, t.max() * widen) for t in tensors[1:]]

    inputs = {
        "int8, one range, calibration min/max": lambda v: fake_quant(v, *cal_in, 8),
        "int16, one range, the input's domain": lambda v: fake_quant(v, dom_lo.min(), dom_hi.max(), 16),
        "int8 per feature, each over its domain": lambda v: fake_quant(v, dom_lo, dom_hi, 8),
        # What `--input-tensor int16` packs (symmetric; the rows above are asymmetric).
        "int16 symmetric, the input's domain": lambda v: fake_quant_symmetric16(
            v, min(dom_lo.min(), cal_in[0]), max(dom_hi.max(), cal_in[1])
        ),
    }
    cases = []
    for input_name, input_q in inputs.items():
        for hidden_name, r in [
            ("calibration min/max", ranges(f_cal)),
            ("calibration min/max widened 1.5x", ranges(f_cal, 1.5)),
            ("calibration min/max widened 2x", ranges(f_cal, 2.0)),
            ("calibration min/max widened 3x", ranges(f_cal, 3.0)),
            ("held-out min/max (a bound)", ranges(f_held)),
        ]:
            q = simulate(held, model, input_q, r)
            agree = int((q[-1].argmax(axis=1) == f_held[-1].argmax(axis=1)).sum())
            cases.append({
                "input": input_name,
                "hidden": hidden_name,
                "sqnr_db": [round(sqnr_db(f, g), 2) for f, g in zip(f_held, q)],
                "agree": agree,
                "rows": int(held.shape[0]),
            })
    # How far the held-out rows reach beyond the calibration rows, per tensor (largest value).
    beyond = [
        {"calibration_max": round(float(c.max()), 3), "heldout_max": round(float(h.max()), 3)}
        for c, h in zip(f_cal, f_held)
    ]
    doc = {
        "source": "tests/python/sqnr_bound_ref.py (numpy fake quantisation of examples/digits)",
        "numpy": np.__version__,
        "calibration_rows": int(calib.shape[0]),
        "cases": cases,
        "maxima": beyond,
    }
    out_dir.mkdir(parents=True, exist_ok=True)
    (out_dir / "digits_sqnr_bound.json").write_text(json.dumps(doc, indent=1) + "\n")


if __name__ == "__main__":
    main()
