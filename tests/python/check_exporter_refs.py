"""Checks the framework-made fixtures in tests/fixtures/exporters/ without the frameworks.

make_torch_cases.py and make_tf_cases.py need PyTorch and TensorFlow/tf2onnx, which the
reference venv does not install (CI never does), so check_fixtures.py cannot regenerate their
files. Instead, for every committed NAME.onnx this:
  - runs onnx.checker.check_model on it;
  - evaluates it with onnx.reference.ReferenceEvaluator on the committed held-out rows and
    compares with the committed "expected" rows (tolerance as check_fixtures.py's for floats:
    1e-6 + 1e-5 * |committed|, few-ulp differences between CPUs; common practice, no source);
  - checks that the framework's own recorded output agrees with that evaluation within 1e-5,
    relative to max(1, |value|) (the bar tests/tests/exporters.rs holds the blobs to);
  - checks that every file in the directory belongs to a case.

Usage: python check_exporter_refs.py   (prints one line per file, "N passed, M failed")
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import onnx

sys.path.insert(0, str(Path(__file__).resolve().parent))
from exporter_common import default_dir, reference  # noqa: E402

FLOAT_ABS = 1e-6
FLOAT_REL = 1e-5
FRAMEWORK_REL = 1e-5


def _rows(dir_: Path, doc: dict):
    while "heldout" not in doc:
        doc = json.loads((dir_ / f"{doc['inputs_from']}.json").read_text())
    return np.asarray(doc["heldout"], dtype=np.float32)


def _compare(m: onnx.ModelProto, x, expected, framework) -> str | None:
    onnx.checker.check_model(m)
    got = reference(m, x).astype(np.float64)
    want = np.asarray(expected, dtype=np.float64)
    if got.shape != want.shape:
        return f"ReferenceEvaluator gives shape {got.shape}, committed {want.shape}"
    bad = np.abs(got - want) > FLOAT_ABS + FLOAT_REL * np.abs(want)
    if bad.any():
        return f"ReferenceEvaluator differs from the committed rows at {int(bad.sum())} values"
    fw = np.asarray(framework, dtype=np.float64)
    gap = float(np.max(np.abs(fw - got) / np.maximum(1.0, np.abs(got))))
    if not gap <= FRAMEWORK_REL:
        return f"the framework's recorded output is {gap:.2e} from ReferenceEvaluator's"
    return None


def check(dir_: Path | None = None) -> list[tuple[str, str | None]]:
    """(file, error or None) for every committed exporter fixture."""
    dir_ = dir_ or default_dir()
    results = []
    seen = set()
    for j in sorted(dir_.glob("*.json")):
        doc = json.loads(j.read_text())
        seen.add(j.name)
        x = _rows(dir_, doc)
        entries = doc["models"] if "models" in doc else [dict(doc, expected=doc["expected"]["rows"])]
        for e in entries:
            rel = e["model"]
            seen.add(rel)
            try:
                m = onnx.load(str(dir_ / rel))
                err = _compare(m, x, e["expected"], doc["framework"]["rows"])
            except Exception as ex:  # noqa: BLE001 - any failure is a failed check
                err = f"{type(ex).__name__}: {ex}"
            results.append((rel, err))
        results.append((j.name, None))
    for p in sorted(dir_.rglob("*")):
        if p.is_file() and str(p.relative_to(dir_)) not in seen:
            results.append((str(p.relative_to(dir_)), "belongs to no case (no JSON names it)"))
    return results


def main() -> int:
    results = check()
    failed = 0
    for rel, err in results:
        if err:
            failed += 1
            print(f"FAIL tests/fixtures/exporters/{rel}: {err}")
        else:
            print(f"ok   tests/fixtures/exporters/{rel}")
    print(f"{len(results) - failed} passed, {failed} failed")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
