"""References for `kinglet vet`: scikit-learn's metrics on the predictions the Rust side made,
and scipy's statistics for the paired-accuracy interval and McNemar's test.

Inputs (committed): `tests/fixtures/vet/digits_predictions.json`, the per-row float and int8
predictions `kinglet vet` makes on `examples/digits/heldout.csv` (written by the Rust test
`tests/tests/vet_digits.rs` when run with KINGLET_BLESS=1; that test also checks that the
predictions it makes today are still these).

Outputs (into OUT_DIR, default tests/fixtures/vet):

* `digits_sklearn.json`: for the float and for the int8 predictions, scikit-learn 1.9
  `accuracy_score`, the count of correct rows, `confusion_matrix(labels=range(10))` and
  `precision_recall_fscore_support(labels=range(10), zero_division=0)`.
* `stats_cases.json`: for paired 2x2 tables (a both right, b only the first right, c only the
  second right, d both wrong): Wilson 95% limits of each margin from
  `scipy.stats.binomtest(x, n).proportion_ci(0.95, method="wilson")`, the phi coefficient,
  Newcombe's (1998) method-10 hybrid score limits for p1 - p2 combined from those Wilson limits
  (the combination formula as written in `converter/src/vet/stats.rs`), and McNemar's exact
  two-sided p-value `scipy.stats.binomtest(b, b + c, 0.5).pvalue`.

Usage: python vet_ref.py [OUT_DIR]
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
from scipy.stats import binomtest
from sklearn.metrics import accuracy_score, confusion_matrix, precision_recall_fscore_support

sys.dont_write_bytecode = True
HERE = Path(__file__).resolve().parent
FIXTURES = HERE.parent / "fixtures" / "vet"
CLASSES = list(range(10))

# Paired tables (a, b, c, d). The digits table is added from the predictions file.
TABLES = [
    (1, 1, 7, 12),  # small, discordant both ways
    (90, 0, 0, 10),  # every row judged alike
    (50, 0, 0, 0),  # both always right: empty margins, phi set to 0
    (0, 0, 0, 30),  # both always wrong
    (430, 4, 1, 15),
    (9000, 40, 25, 935),
    (5000, 1200, 1300, 2500),  # b + c > 1000: McNemar's log-space sum
    (3, 0, 5, 2),
    (0, 7, 0, 0),
]


def wilson(x: int, n: int) -> tuple[float, float]:
    ci = binomtest(x, n).proportion_ci(confidence_level=0.95, method="wilson")
    return float(ci.low), float(ci.high)


def stats_case(a: int, b: int, c: int, d: int) -> dict:
    n = a + b + c + d
    x1, x2 = a + b, a + c
    p1, p2 = x1 / n, x2 / n
    l1, u1 = wilson(x1, n)
    l2, u2 = wilson(x2, n)
    den = (a + b) * (c + d) * (a + c) * (b + d)
    phi = 0.0 if den == 0 else (a * d - b * c) / math.sqrt(den)
    theta = p1 - p2
    delta = math.sqrt(max(0.0, (p1 - l1) ** 2 - 2 * phi * (p1 - l1) * (u2 - p2) + (u2 - p2) ** 2))
    eps = math.sqrt(max(0.0, (u1 - p1) ** 2 - 2 * phi * (u1 - p1) * (p2 - l2) + (p2 - l2) ** 2))
    p_value = 1.0 if b + c == 0 else float(binomtest(b, b + c, 0.5).pvalue)
    return {
        "table": [a, b, c, d],
        "wilson_first": [l1, u1],
        "wilson_second": [l2, u2],
        "phi": phi,
        "newcombe": [max(-1.0, theta - delta), min(1.0, theta + eps)],
        "mcnemar_p": p_value,
    }


def metrics(y_true: np.ndarray, y_pred: np.ndarray) -> dict:
    p, r, f, s = precision_recall_fscore_support(y_true, y_pred, labels=CLASSES, zero_division=0)
    return {
        "accuracy": float(accuracy_score(y_true, y_pred)),
        "correct": int((y_true == y_pred).sum()),
        "confusion_matrix": confusion_matrix(y_true, y_pred, labels=CLASSES).tolist(),
        "precision": [float(v) for v in p],
        "recall": [float(v) for v in r],
        "support": [int(v) for v in s],
    }


def main() -> None:
    out = Path(sys.argv[1]) if len(sys.argv) > 1 else FIXTURES
    out.mkdir(parents=True, exist_ok=True)
    pred = json.loads((FIXTURES / "digits_predictions.json").read_text())
    y = np.array(pred["labels"])
    yf, yq = np.array(pred["float"]), np.array(pred["int8"])
    result = {"rows": int(len(y)), "float": metrics(y, yf), "int8": metrics(y, yq)}
    (out / "digits_sklearn.json").write_text(json.dumps(result, indent=1) + "\n")

    rf, rq = yf == y, yq == y
    digits_table = (int((rf & rq).sum()), int((rf & ~rq).sum()), int((~rf & rq).sum()), int((~rf & ~rq).sum()))
    cases = [stats_case(*t) for t in [digits_table, *TABLES]]
    (out / "stats_cases.json").write_text(json.dumps({"confidence": 0.95, "cases": cases}, indent=1) + "\n")
    print(f"wrote {out / 'digits_sklearn.json'} and {out / 'stats_cases.json'}")


if __name__ == "__main__":
    main()
