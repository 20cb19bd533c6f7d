#!/usr/bin/env python3
"""Record the outside references of src/photometry.rs into
tests/data/photometry/ab_reference.json:

1. Pivot wavelengths of the u g r i z response curves published by
   Doi et al. 2010 (AJ 139, 1628, Table 4; response through airmass 1.3),
   as shipped in the speclite package (files `*2010-<band>.ecsv` of its
   filter data folder). Pivot wavelength of a photon-counting response R:
   lambda_p^2 = int R lambda dlambda / int R / lambda dlambda
   (Tokunaga & Vacca 2005, PASP 117, 421, eq. A19).
2. AB magnitude -> f_lambda in erg s-1 cm-2 A-1 by astropy.units
   (u.ABmag with the spectral_density equivalency), for a grid of
   magnitudes and wavelengths.

Run from the repository root after `python3 -m pip install astropy speclite`:
    python3 tests/scripts/record_photometry.py
"""
import glob
import json
import os

import astropy
import astropy.units as u
import numpy as np
import speclite
from astropy.table import Table

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
OUT = os.path.join(ROOT, "tests", "data", "photometry", "ab_reference.json")


def trapezoid(y, x):
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(x)))


def pivot(path):
    t = Table.read(path, format="ascii.ecsv")
    wave = np.asarray(t["wavelength"].to(u.AA).value, dtype=float)
    resp = np.asarray(t["response"], dtype=float)
    return (trapezoid(resp * wave, wave) / trapezoid(resp / wave, wave)) ** 0.5


def main():
    folder = os.path.join(os.path.dirname(speclite.__file__), "data", "filters")
    bands = []
    for b in "ugriz":
        hits = sorted(glob.glob(os.path.join(folder, f"*2010-{b}.ecsv")))
        assert len(hits) == 1, hits
        bands.append({"band": b, "pivot_angstrom": pivot(hits[0])})
    cases = []
    for m in [12.0, 15.5, 18.3, 20.0, 22.5, 25.0]:
        for lam in [1500.0, 3551.0, 4686.0, 6166.0, 7480.0, 8932.0, 10000.0]:
            f = (m * u.ABmag).to(u.erg / u.s / u.cm**2 / u.AA, u.spectral_density(lam * u.AA))
            cases.append({"mag": m, "wave_angstrom": lam, "flambda_cgs_per_angstrom": float(f.value)})
    out = {
        "_about": "written by tests/scripts/record_photometry.py with astropy "
        f"{astropy.__version__} and speclite {speclite.__version__}",
        "bands": bands,
        "ab_to_flambda": cases,
    }
    with open(OUT, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")
    print(json.dumps(bands, indent=1))


if __name__ == "__main__":
    main()
