#!/usr/bin/env python3
"""Record scikit-learn reference values for zvet's agreement statistics.

Writes tests/data/records/sklearn_reference.json with fixed label lists and
what scikit-learn computes on them:
  - cohen_kappa_score(a, b) for several rater pairs (two-, three- and
    four-category, including the 2x2 worked-example tables),
  - confusion_matrix(truth, pred, labels=[...]) for vetted-vs-photometric
    class lists.
The Rust tests (tests/records/agreement.rs, tests/records/campaign.rs) read this file and compare; they never call
Python. Re-run after changing the cases:  python3 tests/scripts/sklearn_reference.py
"""
import json
import pathlib

import numpy as np
import sklearn
from sklearn.metrics import cohen_kappa_score, confusion_matrix

CLASSES = ["galaxy", "quasar", "star", "unclear"]
OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "records" / "sklearn_reference.json"


def expand(table, names=("yes", "no")):
    a, b = [], []
    for i, row in enumerate(table):
        for j, n in enumerate(row):
            a += [names[i]] * n
            b += [names[j]] * n
    return a, b


def main():
    rng = np.random.RandomState(20261202)
    kappa_cases = []
    for name, table in [
        ("two readers, 50 proposals", [[20, 5], [10, 15]]),
        ("equal p_o, table 1", [[45, 15], [25, 15]]),
        ("equal p_o, table 2", [[25, 35], [5, 35]]),
    ]:
        a, b = expand(table)
        kappa_cases.append({"name": name, "a": a, "b": b})

    # Two inspectors over 120 objects: b copies a 80 % of the time.
    a = list(rng.choice(CLASSES, size=120, p=[0.55, 0.25, 0.15, 0.05]))
    b = [x if rng.rand() < 0.8 else str(rng.choice(CLASSES)) for x in a]
    kappa_cases.append({"name": "four classes, 120 objects", "a": a, "b": b})
    # Three classes, small and unbalanced.
    a = list(rng.choice(CLASSES[:3], size=17, p=[0.7, 0.2, 0.1]))
    b = [x if rng.rand() < 0.6 else str(rng.choice(CLASSES[:3])) for x in a]
    kappa_cases.append({"name": "three classes, 17 objects", "a": a, "b": b})
    for c in kappa_cases:
        c["a"] = [str(x) for x in c["a"]]
        c["b"] = [str(x) for x in c["b"]]
        c["kappa"] = float(cohen_kappa_score(c["a"], c["b"]))

    cm_cases = []
    # Vetted (truth) vs photometric (predicted); photometric never says unclear.
    truth = list(rng.choice(CLASSES, size=200, p=[0.5, 0.3, 0.15, 0.05]))
    pred = []
    for t in truth:
        if rng.rand() < 0.75 and t != "unclear":
            pred.append(t)
        else:
            pred.append(str(rng.choice(CLASSES[:3])))
    cm_cases.append({"name": "200 objects", "truth": truth, "pred": pred})
    truth = ["galaxy", "galaxy", "quasar", "star", "star", "star", "unclear"]
    pred = ["galaxy", "quasar", "quasar", "galaxy", "star", "star", "star"]
    cm_cases.append({"name": "seven objects", "truth": truth, "pred": pred})
    for c in cm_cases:
        c["truth"] = [str(x) for x in c["truth"]]
        c["pred"] = [str(x) for x in c["pred"]]
        c["labels"] = CLASSES
        c["matrix"] = confusion_matrix(c["truth"], c["pred"], labels=CLASSES).tolist()

    out = {
        "source": f"scikit-learn {sklearn.__version__}: sklearn.metrics.cohen_kappa_score, confusion_matrix",
        "kappa": kappa_cases,
        "confusion": cm_cases,
    }
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {OUT}")
    for c in kappa_cases:
        print(f"  kappa {c['name']}: {c['kappa']:.6f}")


if __name__ == "__main__":
    main()
