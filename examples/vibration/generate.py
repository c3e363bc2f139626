"""Deterministic generator of INVENTED accelerometer windows for the `vibration` demo scenario.

Scenario (our own, synthetic): a sensor node bolted to a ventilation fan reads an invented 3-axis
accelerometer part "KLA-3" (+-4 g full scale, 8192 counts/g, int16 output, 1,600 Hz sample rate) and
classifies each 128-sample window (80 ms) into one of four fan states. Nothing here is measured data;
the signal models below are simple made-up shapes chosen so the classes are separable but overlap a
little through noise and amplitude ranges.

Window layout: int16 array [3, 128], axes x, y, z; z carries gravity (+1 g = 8192 counts).

Usage as a script: python generate.py [N_PER_CLASS]  -- prints per-class summary statistics of a
sample batch (the training files themselves are written by train.py).
"""

from __future__ import annotations

import sys

import numpy as np

CLASSES = ("normal", "imbalance", "bearing_wear", "loose_mount")
SAMPLE_RATE_HZ = 1600.0
WINDOW = 128
AXES = 3
COUNTS_PER_G = 8192.0
FULL_SCALE_G = 4.0
INT16_MIN, INT16_MAX = -32768, 32767

_T = np.arange(WINDOW) / SAMPLE_RATE_HZ  # seconds


def _base(rng, f_rot: float) -> np.ndarray:
    """Healthy fan: small 1x rotation sinusoid, a weaker 2x harmonic, noise, gravity on z (in g)."""
    sig = np.zeros((AXES, WINDOW))
    a1 = rng.uniform(0.004, 0.03)
    for ax in range(AXES):
        gain = (1.0, 0.9, 0.3)[ax] * rng.uniform(0.7, 1.3)
        sig[ax] += a1 * gain * np.sin(2 * np.pi * f_rot * _T + rng.uniform(0, 2 * np.pi))
        sig[ax] += 0.25 * a1 * gain * np.sin(2 * np.pi * 2 * f_rot * _T + rng.uniform(0, 2 * np.pi))
    sigma = rng.uniform(0.0015, 0.007)
    sig += rng.normal(0.0, sigma, size=sig.shape)
    # Mounting tilt: a little gravity leaks into x/y, most of it on z.
    tilt = rng.normal(0.0, 0.02, size=2)
    sig[0] += tilt[0]
    sig[1] += tilt[1]
    sig[2] += 1.0 + rng.normal(0.0, 0.005)
    return sig


def _imbalance(rng, f_rot: float) -> np.ndarray:
    """Mass imbalance: a large 1x component on x and y in quadrature (rotating force vector)."""
    sig = _base(rng, f_rot)
    amp = rng.uniform(0.04, 0.22)
    phase = rng.uniform(0, 2 * np.pi)
    ratio = rng.uniform(0.7, 1.1)  # slightly elliptical orbit
    sig[0] += amp * np.cos(2 * np.pi * f_rot * _T + phase)
    sig[1] += amp * ratio * np.sin(2 * np.pi * f_rot * _T + phase)
    sig[2] += 0.1 * amp * np.sin(2 * np.pi * f_rot * _T + rng.uniform(0, 2 * np.pi))
    return sig


def _bearing_wear(rng, f_rot: float) -> np.ndarray:
    """Bearing wear: repeating decaying 350-500 Hz rings (impacts at a defect rate of 3-5.2 x rotation)."""
    sig = _base(rng, f_rot)
    f_ring = rng.uniform(350.0, 500.0)
    tau = rng.uniform(0.0015, 0.004)  # ring decay time constant, s
    amp = rng.uniform(0.03, 0.14)
    period = 1.0 / (f_rot * rng.uniform(3.0, 5.2))
    start = rng.uniform(0.0, period)
    gains = rng.uniform(0.5, 1.0, size=AXES)
    t_hit = start
    while t_hit < _T[-1]:
        dt = _T - t_hit
        active = dt >= 0
        ring = np.where(active, np.exp(-np.where(active, dt, 0.0) / tau) * np.sin(2 * np.pi * f_ring * dt), 0.0)
        hit_amp = amp * rng.uniform(0.6, 1.0)
        for ax in range(AXES):
            sig[ax] += hit_amp * gains[ax] * ring
        t_hit += period * rng.uniform(0.97, 1.03)
    return sig


def _loose_mount(rng, f_rot: float) -> np.ndarray:
    """Loose mount: sub-harmonic 0.5x and 2x components, clipped where the foot hits its stop,
    plus a few random shocks on z."""
    sig = _base(rng, f_rot)
    a_half = rng.uniform(0.02, 0.12)
    a_two = rng.uniform(0.01, 0.06)
    for ax in range(AXES):
        gain = (0.6, 0.6, 1.0)[ax] * rng.uniform(0.7, 1.3)
        motion = a_half * np.sin(2 * np.pi * 0.5 * f_rot * _T + rng.uniform(0, 2 * np.pi))
        motion += a_two * np.sin(2 * np.pi * 2.0 * f_rot * _T + rng.uniform(0, 2 * np.pi))
        stop = rng.uniform(0.5, 0.9) * (a_half + a_two)
        sig[ax] += gain * np.clip(motion, -stop, stop * rng.uniform(1.0, 1.5))
    for _ in range(int(rng.integers(0, 4))):
        t0 = rng.uniform(0.0, _T[-1])
        dt = _T - t0
        active = dt >= 0
        shock = np.where(active, np.exp(-np.where(active, dt, 0.0) / 0.0008), 0.0)
        sig[2] += rng.choice([-1.0, 1.0]) * rng.uniform(0.05, 0.5) * shock
    return sig


_MAKERS = {
    "normal": _base,
    "imbalance": _imbalance,
    "bearing_wear": _bearing_wear,
    "loose_mount": _loose_mount,
}


def to_counts(sig_g: np.ndarray) -> np.ndarray:
    """Sensor model: scale to counts, round to nearest, saturate at the int16 / +-4 g full scale."""
    counts = np.rint(sig_g * COUNTS_PER_G)
    return np.clip(counts, INT16_MIN, INT16_MAX).astype(np.int16)


def make_window(rng, label: int) -> np.ndarray:
    f_rot = rng.uniform(20.0, 30.0)
    return to_counts(_MAKERS[CLASSES[label]](rng, f_rot))


def make_dataset(n_per_class: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Balanced, shuffled dataset: windows int16 [n, 3, 128] and labels int64 (index into CLASSES)."""
    rng = np.random.default_rng(seed)
    labels = np.repeat(np.arange(len(CLASSES), dtype=np.int64), n_per_class)
    labels = labels[rng.permutation(labels.size)]
    windows = np.stack([make_window(rng, int(c)) for c in labels])
    return windows, labels


def main(argv: list[str]) -> int:
    n = int(argv[1]) if len(argv) > 1 else 50
    w, y = make_dataset(n, seed=123)
    for c, name in enumerate(CLASSES):
        sel = w[y == c].astype(np.float64)
        rms = np.sqrt(((sel - sel.mean(axis=2, keepdims=True)) ** 2).mean(axis=2)).mean(axis=0)
        print(f"{name:13s} windows={len(sel):4d} mean rms per axis (counts) x={rms[0]:7.1f} y={rms[1]:7.1f} z={rms[2]:7.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
