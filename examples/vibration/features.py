"""Feature extraction for the `vibration` demo, exactly as specified in FEATURES.md.

Per axis (x, y, z, in that order) of an int16 window [3, 128], in raw count units (float64 here):
  mean = sum(s) / 128
  rms  = sqrt(sum((s - mean)^2) / 128)
  p2p  = max(s) - min(s)
  mad1 = sum(|s[i] - s[i-1]|, i = 1..127) / 127
  zc   = number of i in 1..127 with (s[i] - mean) * (s[i-1] - mean) < 0
Output order: [x_mean, x_rms, x_p2p, x_mad1, x_zc, y_mean, ..., z_zc] (15 values).
"""

from __future__ import annotations

import numpy as np

WINDOW = 128
AXIS_NAMES = ("x", "y", "z")
PER_AXIS = ("mean", "rms", "p2p", "mad1", "zc")
FEATURE_NAMES = [f"{a}_{f}" for a in AXIS_NAMES for f in PER_AXIS]


def axis_features(s: np.ndarray) -> list[float]:
    """The five features of one axis (1-D array of 128 integer samples)."""
    s = np.asarray(s, dtype=np.float64)
    if s.shape != (WINDOW,):
        raise ValueError(f"expected {WINDOW} samples per axis, got shape {s.shape}")
    mean = s.sum() / WINDOW
    d = s - mean
    rms = np.sqrt((d * d).sum() / WINDOW)
    p2p = s.max() - s.min()
    mad1 = np.abs(np.diff(s)).sum() / (WINDOW - 1)
    zc = float(np.count_nonzero(d[1:] * d[:-1] < 0.0))
    return [float(mean), float(rms), float(p2p), float(mad1), zc]


def window_features(window: np.ndarray) -> np.ndarray:
    """15 features of one window [3, 128]."""
    window = np.asarray(window)
    if window.shape != (len(AXIS_NAMES), WINDOW):
        raise ValueError(f"expected a window of shape (3, {WINDOW}), got {window.shape}")
    return np.array([v for ax in range(len(AXIS_NAMES)) for v in axis_features(window[ax])], dtype=np.float64)


def batch_features(windows: np.ndarray) -> np.ndarray:
    """Features of windows [n, 3, 128] -> [n, 15]."""
    return np.stack([window_features(w) for w in windows])
