#!/usr/bin/env python3
"""Record principal angles between subspaces computed by scipy, for the test
of zvet's own implementation (tests/train.rs::principal_angles_match_scipy).

Run from the repository root:  python3 tests/scripts/subspace_angles.py
Writes tests/data/train/subspace_angles.json: pairs of matrices A, B (row-major
lists) made with a seeded numpy generator — plain random pairs, pairs whose
spans differ by tiny rotations (angles down to 1e-9 rad, where the cosine
alone loses precision), pairs of unequal dimension — and the angles
scipy.linalg.subspace_angles returns for them (radians, largest first).
"""
import json
import pathlib

import numpy as np
import scipy
from scipy.linalg import subspace_angles

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "train" / "subspace_angles.json"
rng = np.random.default_rng(20261202)
cases = []


def add(name, a, b):
    cases.append({
        "name": name,
        "a": a.tolist(),
        "b": b.tolist(),
        "angles": subspace_angles(a, b).tolist(),
    })


for i, (n, ka, kb) in enumerate([(12, 3, 3), (40, 4, 4), (25, 2, 5), (30, 6, 1), (8, 4, 4)]):
    add(f"random-{i}", rng.normal(size=(n, ka)), rng.normal(size=(n, kb)))

for eps in [1e-3, 1e-6, 1e-9]:
    a = rng.normal(size=(50, 3))
    b = a + eps * rng.normal(size=(50, 3))
    add(f"perturbed-{eps:g}", a, b)

# orthogonal planes, the second given by a non-orthogonal basis: both angles pi/2
e = np.eye(6)
add("orthogonal", e[:, [0, 1]], e[:, [2, 3]] @ np.array([[2.0, 1.0], [0.0, 3.0]]))

OUT.parent.mkdir(parents=True, exist_ok=True)
OUT.write_text(json.dumps({
    "_about": "principal angles by scipy.linalg.subspace_angles "
              f"(scipy {scipy.__version__}, numpy {np.__version__}); "
              "written by tests/scripts/subspace_angles.py",
    "cases": cases,
}, indent=1) + "\n")
print(f"wrote {len(cases)} cases to {OUT}")
