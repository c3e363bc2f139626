"""The float forward pass of a dense classifier in numpy, timed, for `cargo bench --bench vet`.

Usage: python vet_numpy.py DIR   (DIR holds x.npy, w1.npy, b1.npy, w2.npy, b2.npy, scale.txt)

Prints one JSON line: forward-pass seconds (best and median of 5 runs), the predicted-class
checksum, and the BLAS libraries and thread counts numpy uses (threadpoolctl).
"""

import json
import sys
import time
from pathlib import Path

import numpy as np
from threadpoolctl import threadpool_info


def forward(x, scale, w1, b1, w2, b2):
    h = np.maximum((x * scale) @ w1.T + b1, np.float32(0))
    z = h @ w2.T + b2
    z = z - z.max(axis=1, keepdims=True)
    e = np.exp(z)
    p = e / e.sum(axis=1, keepdims=True)
    return p, p.argmax(axis=1)


def main():
    d = Path(sys.argv[1])
    x = np.load(d / "x.npy")
    w1, b1, w2, b2 = (np.load(d / f"{n}.npy") for n in ("w1", "b1", "w2", "b2"))
    scale = np.float32(float((d / "scale.txt").read_text()))
    times = []
    for _ in range(5):
        t = time.perf_counter()
        p, cls = forward(x, scale, w1, b1, w2, b2)
        times.append(time.perf_counter() - t)
    times.sort()
    blas = [
        {k: i.get(k) for k in ("internal_api", "num_threads", "architecture", "version")}
        for i in threadpool_info()
        if i.get("user_api") == "blas"
    ]
    print(json.dumps({
        "forward_best_s": times[0],
        "forward_median_s": times[len(times) // 2],
        "dtype": str(p.dtype),
        "class_sum": int(cls.sum()),
        "blas": blas,
    }))


if __name__ == "__main__":
    main()
