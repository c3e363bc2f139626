#!/usr/bin/env python3
"""scikit-learn's accuracy_score applied to the int8 predictions of every candidate of the
weight-precision search on the digits example (tests/fixtures/search/digits_candidates.json,
written by tests/tests/precision_search.rs with KINGLET_BLESS=1). Writes
tests/fixtures/search/digits_candidates_sklearn.json: per candidate, the number of held-out rows
predicted right (accuracy_score(labels, predictions, normalize=False)), which the test compares
with the search's own count.

Run with the reference venv:  .venv/bin/python tests/python/search_ref.py [OUT_DIR]
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import sklearn
from sklearn.metrics import accuracy_score

HERE = Path(__file__).resolve().parent
FIXTURES = HERE.parent / "fixtures" / "search"


def main():
    out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else FIXTURES
    out_dir.mkdir(parents=True, exist_ok=True)
    d = json.loads((FIXTURES / "digits_candidates.json").read_text())
    labels = d["labels"]
    rows = [{"weights": c["weights"],
             "correct": int(accuracy_score(labels, c["predictions"], normalize=False))}
            for c in d["candidates"]]
    doc = {"source": f"scikit-learn {sklearn.__version__} sklearn.metrics.accuracy_score(normalize=False)",
           "candidates": rows}
    (out_dir / "digits_candidates_sklearn.json").write_text(json.dumps(doc, indent=1) + "\n")
    print(f"{len(rows)} candidates scored")


if __name__ == "__main__":
    main()
