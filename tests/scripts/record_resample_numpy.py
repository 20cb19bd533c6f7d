"""Record a flux-conserving rebin onto a log10-lambda grid, computed with numpy.

Input: 300 pixels uniform in lambda (4000-4897 A, step 3 A), random flux and
sigma. Output: the grid of step DLOGLAM whose centres are multiples of the
step covering the input (as zvet's LogGrid::covering is documented). Each
output pixel's flux is the mean of the piecewise-constant input over the
pixel's span in log10 lambda, computed here from the cumulative integral
(np.cumsum, np.interp at the output edges); its variance is
sum(o_ij^2 var_i) / W_j^2 with the overlaps o_ij from array broadcasting.
Only output pixels wholly inside the input are recorded.

Writes tests/data/resample/resample_numpy.json.
Run: PYTHONPATH=target/reference/python python3 tests/scripts/record_resample_numpy.py
"""
import json
import math
import os

import numpy as np

DLOGLAM = 1e-4
rng = np.random.default_rng(7)
wave = 4000.0 + 3.0 * np.arange(300)
flux = 1.0 + 0.2 * rng.standard_normal(300)
sigma = 0.05 + 0.05 * rng.random(300)

lw = np.log10(wave)
mid = 0.5 * (lw[1:] + lw[:-1])
lo = np.concatenate([[lw[0] - (mid[0] - lw[0])], mid])
hi = np.concatenate([mid, [lw[-1] + (lw[-1] - mid[-1])]])

i0 = math.floor(math.log10(wave[0]) / DLOGLAM)
i1 = math.ceil(math.log10(wave[-1]) / DLOGLAM)
centres = (i0 + np.arange(i1 - i0 + 1)) * DLOGLAM
clo, chi = centres - 0.5 * DLOGLAM, centres + 0.5 * DLOGLAM
inside = (clo >= lo[0]) & (chi <= hi[-1])

# cumulative integral of the piecewise-constant flux over log10 lambda
edges = np.concatenate([lo, [hi[-1]]])
cum = np.concatenate([[0.0], np.cumsum(flux * (hi - lo))])
out_flux = (np.interp(chi, edges, cum) - np.interp(clo, edges, cum)) / DLOGLAM

ov = np.clip(np.minimum(hi[None, :], chi[:, None]) - np.maximum(lo[None, :], clo[:, None]), 0.0, None)
W = ov.sum(axis=1)
out_var = (ov**2 * sigma[None, :] ** 2).sum(axis=1) / W**2

idx = np.nonzero(inside)[0]
out = {
    "script": "tests/scripts/record_resample_numpy.py",
    "numpy": np.__version__,
    "dloglam": DLOGLAM,
    "wave": wave.tolist(),
    "flux": flux.tolist(),
    "sigma": sigma.tolist(),
    "grid_loglam0": float(centres[0]),
    "grid_n": int(len(centres)),
    "index": idx.tolist(),
    "flux_out": out_flux[idx].tolist(),
    "sigma_out": np.sqrt(out_var[idx]).tolist(),
}
path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "data", "resample", "resample_numpy.json")
with open(path, "w") as f:
    json.dump(out, f)
print(path, len(idx), "pixels")
