"""Regenerates every committed reference fixture into a temporary directory and compares.

Comparison rules:
  .csv / .json  same text, except that numbers may differ by FLOAT_ABS + FLOAT_REL * |committed|:
                float32 reference outputs (onnx ReferenceEvaluator, numpy matmul) change in their
                last bits with the CPU's SIMD width, because the summation order changes (seen: an
                AVX-512 machine against the AVX2 one that wrote the fixtures, at most 1.5e-7
                absolute, 2.1e-6 relative). Integers, strings and layout must still match exactly.
  .npy          same dtype, shape and values
  .onnx         same structure (opsets, graph inputs/outputs, nodes with their inputs/outputs and
                attributes) and numerically equal weights (initializers and float attributes) within
                an absolute tolerance of 1e-7, because protobuf serialisation may order bytes differently

Framework-made fixtures (tests/fixtures/exporters/, written by make_torch_cases.py and
make_tf_cases.py) are not regenerated here: those scripts need PyTorch and TensorFlow/tf2onnx, which
this venv does not install. check_exporter_refs.py re-evaluates the committed files with
ReferenceEvaluator instead, and its results are counted here.

Prints one line per file and a final line "N passed, M failed"; exits non-zero if anything differs or
a generator fails.

Usage: python check_fixtures.py
"""

from __future__ import annotations

import math
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import onnx
from onnx import numpy_helper

ROOT = Path(__file__).resolve().parents[2]
ONNX_TOLERANCE = 1e-7
# Few-ulp float32 differences between CPUs (see the docstring); common practice, no source.
FLOAT_ABS = 1e-6
FLOAT_REL = 1e-5

# (generator script, committed directory, files the generator writes)
GENERATORS = [
    ("tests/python/requant_ref.py", "tests/fixtures", ["requant_cases.csv", "multiplier_cases.csv"]),
    ("tests/python/quantize_linear_ref.py", "tests/fixtures", ["quantize_linear_cases.csv", "quantize_linear_i16_cases.csv"]),
    ("tests/python/dense_ref.py", "tests/fixtures", ["softmax_cases.json", "dense_int8_cases.json"]),
    ("examples/digits/make_model.py", "examples/digits",
     ["model.onnx", "heldout.csv", "calibration.csv", "expected_proba.csv", "reference_metrics.json"]),
    ("examples/vibration/train.py", "examples/vibration",
     ["model.onnx", "heldout.csv", "calibration.csv", "expected_proba.csv", "replay_windows.npy",
      "replay_labels.npy"]),
    # None: compare every file the generator writes (recursively).
    ("tests/python/make_loader_cases.py", "tests/fixtures/loaders", None),
    ("tests/python/make_onnx_cases.py", "tests/fixtures/onnx", None),
    ("tests/python/make_linear_cases.py", "tests/fixtures/linear", None),
    ("tests/python/make_activation_cases.py", "tests/fixtures/activation", None),
    ("tests/python/vet_ref.py", "tests/fixtures/vet", ["digits_sklearn.json", "stats_cases.json"]),
    ("tests/python/calib_ref.py", "tests/fixtures/calib", ["calib_cases.json"]),
    ("tests/python/sqnr_bound_ref.py", "tests/fixtures/calib", ["digits_sqnr_bound.json"]),
    ("tests/python/int4_ref.py", "tests/fixtures/int4", ["digits_int4.json"]),
    ("tests/python/make_search_cases.py", "tests/fixtures/search", ["mlp_pixels784_div255.onnx", "mlp_pixels784_div255.json"]),
    ("tests/python/search_ref.py", "tests/fixtures/search", ["digits_candidates_sklearn.json"]),
]


_NUMBER = re.compile(r"-?(?:\d+\.\d*|\.\d+|\d+)(?:[eE][-+]?\d+)?")


def _numbers_close(la: str, lb: str) -> bool:
    """Whether two lines are equal once their numbers are compared with the float tolerance."""
    if _NUMBER.sub("#", la) != _NUMBER.sub("#", lb):
        return False
    for x, y in zip(_NUMBER.findall(la), _NUMBER.findall(lb)):
        if x == y:
            continue
        is_float = any(c in x + y for c in ".eE")
        if not is_float:
            return False
        u, v = float(x), float(y)
        if not (math.isfinite(u) and math.isfinite(v)) or abs(u - v) > FLOAT_ABS + FLOAT_REL * abs(u):
            return False
    return True


def compare_text(a: Path, b: Path) -> str | None:
    ta = a.read_text().splitlines()
    tb = b.read_text().splitlines()
    for i, (la, lb) in enumerate(zip(ta, tb), start=1):
        if la != lb and not _numbers_close(la, lb):
            return f"line {i} differs: committed {la[:120]!r} vs regenerated {lb[:120]!r}"
    if len(ta) != len(tb):
        return f"line count differs: committed {len(ta)} vs regenerated {len(tb)}"
    ends = lambda t: (t.endswith(b"\n"), b"\r\n" in t)  # noqa: E731
    if ends(a.read_bytes()) != ends(b.read_bytes()):
        return "line endings or trailing newline differ"
    return None


def compare_npy(a: Path, b: Path) -> str | None:
    xa, xb = np.load(a, allow_pickle=False), np.load(b, allow_pickle=False)
    if xa.dtype != xb.dtype:
        return f"dtype differs: committed {xa.dtype} vs regenerated {xb.dtype}"
    if xa.shape != xb.shape:
        return f"shape differs: committed {xa.shape} vs regenerated {xb.shape}"
    if not np.array_equal(xa, xb):
        n = int(np.sum(xa != xb))
        return f"{n} values differ"
    return None


def _value_info(v) -> str:
    return str(v.type).replace("\n", " ") + "|" + v.name


def _close(xa: np.ndarray, xb: np.ndarray, what: str) -> str | None:
    if xa.dtype != xb.dtype or xa.shape != xb.shape:
        return f"{what}: dtype/shape differ ({xa.dtype}{xa.shape} vs {xb.dtype}{xb.shape})"
    if np.issubdtype(xa.dtype, np.floating):
        diff = float(np.max(np.abs(xa.astype(np.float64) - xb.astype(np.float64)))) if xa.size else 0.0
        if not diff <= ONNX_TOLERANCE:
            return f"{what}: values differ by up to {diff:.3g} (tolerance {ONNX_TOLERANCE})"
    elif not np.array_equal(xa, xb):
        return f"{what}: values differ"
    return None


def _attr_value(attr):
    v = onnx.helper.get_attribute_value(attr)
    if isinstance(v, onnx.TensorProto):
        return numpy_helper.to_array(v)
    if isinstance(v, (list, tuple)) and v and isinstance(v[0], float):
        return np.array(v, dtype=np.float64)
    if isinstance(v, float):
        return np.array([v], dtype=np.float64)
    return v


def compare_onnx(a: Path, b: Path) -> str | None:
    ma, mb = onnx.load(str(a)), onnx.load(str(b))
    if sorted((o.domain, o.version) for o in ma.opset_import) != sorted((o.domain, o.version) for o in mb.opset_import):
        return "opset imports differ"
    if ma.ir_version != mb.ir_version:
        return f"ir_version differs: {ma.ir_version} vs {mb.ir_version}"
    ga, gb = ma.graph, mb.graph
    if ga.name != gb.name:
        return f"graph name differs: {ga.name!r} vs {gb.name!r}"
    for kind in ("input", "output"):
        la = [_value_info(v) for v in getattr(ga, kind)]
        lb = [_value_info(v) for v in getattr(gb, kind)]
        if la != lb:
            return f"graph {kind}s differ: {la} vs {lb}"
    if len(ga.node) != len(gb.node):
        return f"node count differs: {len(ga.node)} vs {len(gb.node)}"
    for i, (na, nb) in enumerate(zip(ga.node, gb.node)):
        where = f"node {i} ({na.op_type} '{na.name}')"
        if (na.op_type, na.domain, list(na.input), list(na.output)) != (nb.op_type, nb.domain, list(nb.input), list(nb.output)):
            return f"{where}: op/domain/inputs/outputs differ"
        aa = {x.name: _attr_value(x) for x in na.attribute}
        ab = {x.name: _attr_value(x) for x in nb.attribute}
        if sorted(aa) != sorted(ab):
            return f"{where}: attribute names differ"
        for k in aa:
            va, vb = aa[k], ab[k]
            if isinstance(va, np.ndarray):
                err = _close(va, np.asarray(vb), f"{where} attribute {k}")
                if err:
                    return err
            elif va != vb:
                return f"{where} attribute {k} differs: {va!r} vs {vb!r}"
    ia = {t.name: t for t in ga.initializer}
    ib = {t.name: t for t in gb.initializer}
    if sorted(ia) != sorted(ib):
        return f"initializer names differ: {sorted(ia)} vs {sorted(ib)}"
    for name in sorted(ia):
        err = _close(numpy_helper.to_array(ia[name]), numpy_helper.to_array(ib[name]), f"initializer '{name}'")
        if err:
            return err
    return None


def compare(a: Path, b: Path) -> str | None:
    if not a.exists():
        return "committed file is missing"
    if not b.exists():
        return "generator did not write this file"
    suffix = a.suffix
    if a.read_bytes() == b.read_bytes():
        return None
    if suffix in (".csv", ".json"):
        return compare_text(a, b)
    if suffix == ".npy":
        return compare_npy(a, b)
    if suffix == ".onnx":
        return compare_onnx(a, b)
    return f"no comparison rule for '{suffix}' files"


def main() -> int:
    passed = failed = 0
    start = time.monotonic()
    env = dict(os.environ, PYTHONDONTWRITEBYTECODE="1")
    with tempfile.TemporaryDirectory(prefix="kinglet-fixtures-") as tmp:
        for script, committed, files in GENERATORS:
            out = Path(tmp) / script.replace("/", "_")
            t0 = time.monotonic()
            proc = subprocess.run([sys.executable, str(ROOT / script), str(out)], cwd=ROOT, env=env,
                                  capture_output=True, text=True)
            dt = time.monotonic() - t0
            if proc.returncode != 0:
                print(f"FAIL generator {script} exited with {proc.returncode} after {dt:.1f} s:\n{proc.stdout}{proc.stderr}")
                failed += len(files)
                continue
            for line in proc.stdout.strip().splitlines():
                print(f"  [{script}] {line}")
            names = files if files is not None else sorted(
                str(p.relative_to(out)) for p in out.rglob("*") if p.is_file())
            for name in names:
                rel = f"{committed}/{name}"
                err = compare(ROOT / committed / name, out / name)
                if err and committed == "tests/fixtures/linear":
                    # Fitted models move with the CPU's BLAS kernel: see check_fitted_refs.py.
                    sys.path.insert(0, str(ROOT / "tests" / "python"))
                    import check_fitted_refs  # noqa: E402

                    fb = check_fitted_refs.fallback(ROOT / committed / name, out / name)
                    if fb is None:
                        print(f"ok   {rel} (fitted: did not regenerate exactly; {err[:60]}; "
                              "the committed model reproduces its references)")
                        passed += 1
                        continue
                    err = f"{err}; and {fb}"
                if err:
                    failed += 1
                    print(f"FAIL {rel}: {err}")
                else:
                    passed += 1
                    print(f"ok   {rel}")
    # Not regenerated (needs PyTorch / TensorFlow): re-evaluated instead, see the docstring.
    sys.path.insert(0, str(ROOT / "tests" / "python"))
    import check_exporter_refs  # noqa: E402

    for rel, err in check_exporter_refs.check():
        if err:
            failed += 1
            print(f"FAIL tests/fixtures/exporters/{rel}: {err}")
        else:
            passed += 1
            print(f"ok   tests/fixtures/exporters/{rel} (framework-made: re-evaluated, not regenerated)")
    print(f"(regeneration took {time.monotonic() - start:.1f} s)")
    print(f"{passed} passed, {failed} failed")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
