"""Record the scatter-based noise estimate with numpy on a fixed set of pixels.

Writes tests/data/noise/noise_numpy.json: the pixels (a continuum with two
emission lines, Gaussian noise of known sigma that changes along the
spectrum, and three cosmic-ray spikes) and, per pixel, the estimate computed
here with numpy: sigma = MAD(first differences in a window of HALF pixels
each side) / Phi^-1(3/4) / sqrt(2), the MAD constant taken from Python's
statistics.NormalDist (not a rounded 1.4826). The Rust test
(tests/noise.rs) computes the same quantity with zvet and compares.

Run: python3 tests/scripts/record_noise_numpy.py  (numpy >= 2)
"""
import json
import os
import statistics

import numpy as np

HALF = 25  # zvet's NOISE_HALF_WIDTH
N = 600

rng = np.random.default_rng(20261202)
wave = 5000.0 + 1.25 * np.arange(N)
sigma_true = np.where(np.arange(N) < N // 2, 0.05, 0.12)
cont = 1.0 + 0.3 * (wave - wave[0]) / (wave[-1] - wave[0])
lines = 0.8 * np.exp(-0.5 * ((wave - 5200.0) / 3.0) ** 2) + 0.5 * np.exp(-0.5 * ((wave - 5600.0) / 2.0) ** 2)
flux = cont + lines + rng.normal(0.0, sigma_true)
for i in (100, 101, 450):
    flux[i] += 5.0  # cosmic-ray hits

d = np.diff(flux)  # d[j] = flux[j+1] - flux[j], j = 0 .. N-2
k = 1.0 / statistics.NormalDist().inv_cdf(0.75)
est = []
for i in range(N):
    lo, hi = max(i - HALF, 0), min(i + HALF + 1, N - 1)
    w = d[lo:hi]
    mad = np.median(np.abs(w - np.median(w)))
    est.append(float(k * mad / np.sqrt(2.0)))

out = {
    "script": "tests/scripts/record_noise_numpy.py",
    "numpy": np.__version__,
    "half_width": HALF,
    "mad_to_sigma": k,
    "wave": wave.tolist(),
    "flux": flux.tolist(),
    "sigma_true": sigma_true.tolist(),
    "sigma_numpy": est,
}
here = os.path.dirname(os.path.abspath(__file__))
path = os.path.join(here, "..", "data", "noise", "noise_numpy.json")
with open(path, "w") as f:
    json.dump(out, f)
print(path)
