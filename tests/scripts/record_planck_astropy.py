"""Record Planck's law B_lambda(T) with astropy's BlackBody model.

Writes tests/data/templates/planck_astropy.json: for each temperature, B_lambda
at a set of wavelengths (vacuum Angstrom), in erg s^-1 cm^-2 A^-1 sr^-1, as
astropy.modeling.physical_models.BlackBody computes it. The Rust test
templates::planck_matches_astropy_blackbody compares the shape (ratios to the
value at 5500 A) of zvet's templates::profiles::planck with it.

Run: PYTHONPATH=target/reference/python python3 tests/scripts/record_planck_astropy.py
"""
import json
import os

import astropy
import astropy.units as u
from astropy.modeling.physical_models import BlackBody

WAVES = [912.0, 1500.0, 3000.0, 3646.0, 4000.0, 5500.0, 7000.0, 10400.0, 20000.0, 50000.0]
TEMPS = [3000.0, 5772.0, 9600.0, 20000.0, 40000.0]

out = {"script": "tests/scripts/record_planck_astropy.py", "astropy": astropy.__version__,
       "unit": "erg / (Angstrom s sr cm2)", "wave_angstrom": WAVES, "b_lambda": {}}
for t in TEMPS:
    bb = BlackBody(temperature=t * u.K)
    flam = bb(WAVES * u.AA).to(u.erg / (u.s * u.cm**2 * u.AA * u.sr),
                                equivalencies=u.spectral_density(WAVES * u.AA))
    out["b_lambda"][str(int(t))] = [float(v) for v in flam.value]
path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "data", "templates", "planck_astropy.json")
with open(path, "w") as f:
    json.dump(out, f, indent=1)
print(path)
