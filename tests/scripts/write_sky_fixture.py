#!/usr/bin/env python3
"""Write tests/data/tools/sky_table.fits with astropy: a one-pixel-per-row
binary table (WAVELENGTH in Angstrom, stored red to blue; FLUX, IVAR, SKY)
whose SKY column must be kept with the spectrum, reversed with it, and
tests/data/tools/sky_table.json with what astropy reads back (blue to red).

Run from the repository root:  python3 tests/scripts/write_sky_fixture.py
"""
import json
import os

import astropy
import numpy as np
from astropy.io import fits

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DIR = os.path.join(ROOT, "tests", "data", "tools")


def main():
    n = 40
    wave = np.linspace(6000.0, 5000.0, n)  # decreasing on purpose
    flux = 2.0 + 0.001 * (wave - 5000.0)
    ivar = np.full(n, 25.0)
    sky = 1.0 + np.exp(-0.5 * ((wave - 5577.3) / 4.0) ** 2) * 30.0
    cols = [
        fits.Column(name="WAVELENGTH", format="D", unit="Angstrom", array=wave),
        fits.Column(name="FLUX", format="D", unit="1e-17 erg/s/cm2/Angstrom", array=flux),
        fits.Column(name="IVAR", format="D", array=ivar),
        fits.Column(name="SKY", format="D", array=sky),
    ]
    hdu = fits.BinTableHDU.from_columns(cols, name="SPECTRUM")
    hdu.header["OBJECT"] = "sky-fixture"
    fits.HDUList([fits.PrimaryHDU(), hdu]).writeto(os.path.join(DIR, "sky_table.fits"), overwrite=True)
    with fits.open(os.path.join(DIR, "sky_table.fits")) as h:
        d = h["SPECTRUM"].data
        order = np.argsort(d["WAVELENGTH"])
        out = {
            "_about": f"written by tests/scripts/write_sky_fixture.py with astropy {astropy.__version__}",
            "wave": [float(x) for x in d["WAVELENGTH"][order]],
            "sky": [float(x) for x in d["SKY"][order]],
        }
    with open(os.path.join(DIR, "sky_table.json"), "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
