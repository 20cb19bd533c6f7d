"""Record reference values for zvet's audit estimators (tests/audit.rs).

Run once with statsmodels and samplics installed:
    python tests/scripts/record_audit_reference.py > tests/data/audit/reference.json

- Wilson score intervals: statsmodels.stats.proportion.proportion_confint(method="wilson").
- Stratified estimates and their linearised (Taylor) standard errors:
  samplics.estimation.TaylorEstimator, with sampling weights N_h/n_h,
  strata, and finite-population factors 1 - n_h/N_h — a general-purpose
  survey-sampling library, independent of zvet's code.
The synthetic stratified sample below is drawn here with numpy (fixed seed)
and written into the JSON so the Rust test uses the very same numbers.
"""
import json
import warnings

import numpy as np
import statsmodels
from statsmodels.stats.proportion import proportion_confint

warnings.filterwarnings("ignore")
import samplics  # noqa: E402
from samplics.estimation import TaylorEstimator  # noqa: E402
from samplics.utils.types import PopParam  # noqa: E402

rng = np.random.default_rng(20261202)

wilson = []
for k, n in [(0, 10), (1, 10), (5, 10), (10, 10), (81, 263), (3, 150), (47, 60), (0, 1)]:
    lo, hi = proportion_confint(k, n, alpha=0.05, method="wilson")
    wilson.append({"k": k, "n": n, "lo": float(lo), "hi": float(hi)})

# Three strata of very different sizes and rates; unequal sampling fractions.
sizes = [4000, 900, 120]
drawn = [60, 45, 30]
p_domain = [0.5, 0.7, 0.9]   # share of objects in the ratio's domain (x = 1)
p_y = [0.10, 0.30, 0.60]      # share with y = 1 inside the domain
obs = []
for h, (nh, px, py) in enumerate(zip(drawn, p_domain, p_y)):
    x = (rng.random(nh) < px).astype(int)
    y = x * (rng.random(nh) < py).astype(int)
    for xi, yi in zip(x, y):
        obs.append({"stratum": h, "x": int(xi), "y": int(yi)})

stratum = np.array([o["stratum"] for o in obs])
x = np.array([o["x"] for o in obs], dtype=float)
y = np.array([o["y"] for o in obs], dtype=float)
w = np.array([sizes[h] / drawn[h] for h in stratum])
fpc = {h: 1.0 - drawn[h] / sizes[h] for h in range(len(sizes))}

prop = TaylorEstimator(PopParam.mean)
prop.estimate(y=y, samp_weight=w, stratum=stratum, fpc=fpc)
rat = TaylorEstimator(PopParam.ratio)
rat.estimate(y=y, x=x, samp_weight=w, stratum=stratum, fpc=fpc)


def scalar(d):
    return float(d if np.isscalar(d) else list(d.values())[0]) if isinstance(d, dict) else float(d)


print(json.dumps({
    "sources": {
        "statsmodels": statsmodels.__version__,
        "samplics": samplics.__version__,
    },
    "wilson": wilson,
    "stratified": {
        "sizes": sizes,
        "obs": obs,
        "mean_y": {"value": scalar(prop.point_est), "se": scalar(prop.stderror)},
        "ratio_y_x": {"value": scalar(rat.point_est), "se": scalar(rat.stderror)},
    },
}, indent=1))
