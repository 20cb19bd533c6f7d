#!/usr/bin/env python3
"""Write the multi-object frame fixtures of the io tests (tests/data/io/frame_*.fits)
and record in tests/data/io/frames_expected.json what astropy reads from them:
per target row its id, position, wavelengths (astropy.wcs for per-row and
header WCS, the 2-D wavelength image itself otherwise), flux and inverse
variance. Sky and unused rows are listed as skipped.

A multi-object frame is one 2-D image with one spectrum per row (NAXIS1 =
pixels, NAXIS2 = fibres or slits), companion 2-D images of the same shape
(IVAR / ERROR / MASK / WAVE by EXTNAME) and a binary table with one row per
image row: object id, RA, Dec and the row's use (target, sky, unused), and
optionally that row's wavelength solution as WCS keywords in columns
(CRVAL1, CDELT1, CRPIX1).

Run from the repository root with astropy and numpy on the path, e.g. with
the libraries the tests install:
    PYTHONPATH=target/reference/python python3 tests/scripts/make_frame_fixtures.py
The data are made up (smooth continuum + one line + seeded noise); they are
ours and are committed together with this script.
"""
import json
import os
import warnings

import astropy
import numpy as np
from astropy.io import fits
from astropy.wcs import WCS

OUT = os.path.join(os.path.dirname(__file__), "..", "data", "io")
rng = np.random.default_rng(20261203)


def clean(a):
    return [None if not np.isfinite(x) else float(x) for x in np.asarray(a, dtype=float)]


def spectrum(n, line_at):
    x = np.linspace(0, 1, n)
    f = 5 + 2 * x + rng.normal(0, 0.2, n)
    f += 6 * np.exp(-0.5 * ((np.arange(n) - line_at) / 1.8) ** 2)
    return f.astype(np.float32)


def wcs_wave(card_values, n):
    """Wavelengths (Angstrom) of pixels 0..n-1 by astropy.wcs from 1-D WCS keywords.
    wcslib works in SI: spectral axes come back in metres."""
    h = fits.Header()
    h["NAXIS"] = 1
    h["NAXIS1"] = n
    for k, v in card_values.items():
        h[k] = v
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        w = WCS(h)
    world = w.all_pix2world(np.arange(n, dtype=float), 0)[0]
    unit = str(w.wcs.cunit[0])
    assert unit == "m", unit
    return world * 1e10


files = {}

# 1. Flux in the primary HDU, inverse variance and a 2-D wavelength image
#    (each row its own, slightly non-linear solution), fibre table.
n_rows, n_pix = 6, 120
kinds = ["TARGET", "SKY", "TARGET", "UNUSED", "TARGET", "SKY"]
ids = ["slt-0101", "sky-01", "slt-0102", "", "slt-0103", "sky-02"]
ra = [150.10, 150.20, 150.30, 0.0, 150.50, 150.60]
dec = [2.10, 2.20, 2.30, 0.0, 2.50, 2.60]
p = np.arange(n_pix, dtype=float)
wave = np.array([4000.0 + 0.7 * r + 2.5 * p + 1.0e-4 * p**2 for r in range(n_rows)])
flux = np.array([spectrum(n_pix, 30 + 10 * r) for r in range(n_rows)], dtype=np.float32)
ivar = np.full((n_rows, n_pix), 25.0, dtype=np.float32)
ivar[0, 5:8] = 0.0  # bad pixels of the first target
flux[3] = 0.0  # an unused fibre
prim = fits.PrimaryHDU(flux)
prim.header["BUNIT"] = "1e-17 erg/(s cm2 Angstrom)"
hw = fits.ImageHDU(wave, name="WAVE")
hw.header["BUNIT"] = "Angstrom"
tab = fits.BinTableHDU.from_columns(
    [
        fits.Column(name="OBJECT_ID", format="16A", array=ids),
        fits.Column(name="RA", format="D", unit="deg", array=ra),
        fits.Column(name="DEC", format="D", unit="deg", array=dec),
        fits.Column(name="TYPE", format="8A", array=kinds),
    ],
    name="FIBRES",
)
fits.HDUList([prim, fits.ImageHDU(ivar, name="IVAR"), hw, tab]).writeto(
    os.path.join(OUT, "frame_wave2d.fits"), overwrite=True)
# What astropy reads back from the file.
with fits.open(os.path.join(OUT, "frame_wave2d.fits")) as h:
    fl, iv, wv, t = h[0].data, h["IVAR"].data, h["WAVE"].data, h["FIBRES"].data
    files["frame_wave2d.fits"] = {
        "rows": n_rows, "pixels": n_pix, "medium": "vacuum",
        "targets": [
            {"row": r, "id": str(t["OBJECT_ID"][r]), "ra": float(t["RA"][r]), "dec": float(t["DEC"][r]),
             "wave": clean(wv[r]), "flux": clean(fl[r]), "ivar": clean(iv[r])}
            for r in range(n_rows) if t["TYPE"][r].strip() == "TARGET"
        ],
        "skipped": {"sky": kinds.count("SKY"), "unused": kinds.count("UNUSED")},
    }

# 2. Flux in an extension, sigma image, per-row linear WCS in the slit table
#    (air wavelengths in nm: CTYPE1 = AWAV, CUNIT1 = nm on the image).
n_rows, n_pix = 5, 100
roles = ["target", "target", "sky", "target", "unused"]
names = ["slt-0201", "slt-0202", "sky", "slt-0203", "spare"]
crval = [420.0, 421.5, 420.7, 419.2, 420.0]
cdelt = [0.30, 0.29, 0.30, 0.31, 0.30]
crpix = [1.0, 1.0, 11.0, 1.0, 1.0]
flux = np.array([spectrum(n_pix, 20 + 12 * r) for r in range(n_rows)], dtype=np.float32)
sigma = np.full((n_rows, n_pix), 0.2, dtype=np.float32)
hf = fits.ImageHDU(flux, name="FLUX")
hf.header["CTYPE1"] = "AWAV"
hf.header["CUNIT1"] = "nm"
tab = fits.BinTableHDU.from_columns(
    [
        fits.Column(name="ID", format="12A", array=names),
        fits.Column(name="RA", format="D", unit="deg", array=[160.1, 160.2, 160.3, 160.4, 160.5]),
        fits.Column(name="DEC", format="D", unit="deg", array=[-5.1, -5.2, -5.3, -5.4, -5.5]),
        fits.Column(name="ROLE", format="8A", array=roles),
        fits.Column(name="CRVAL1", format="D", array=crval),
        fits.Column(name="CDELT1", format="D", array=cdelt),
        fits.Column(name="CRPIX1", format="D", array=crpix),
    ],
    name="SLITS",
)
fits.HDUList([fits.PrimaryHDU(), hf, fits.ImageHDU(sigma, name="ERROR"), tab]).writeto(
    os.path.join(OUT, "frame_rowwcs.fits"), overwrite=True)
with fits.open(os.path.join(OUT, "frame_rowwcs.fits")) as h:
    fl, sg, t = h["FLUX"].data, h["ERROR"].data, h["SLITS"].data
    files["frame_rowwcs.fits"] = {
        "rows": n_rows, "pixels": n_pix, "medium": "air",
        "targets": [
            {"row": r, "id": str(t["ID"][r]), "ra": float(t["RA"][r]), "dec": float(t["DEC"][r]),
             "wave": clean(wcs_wave({"CTYPE1": "AWAV", "CUNIT1": "nm", "CRVAL1": float(t["CRVAL1"][r]),
                                     "CDELT1": float(t["CDELT1"][r]), "CRPIX1": float(t["CRPIX1"][r])}, n_pix)),
             "flux": clean(fl[r]), "ivar": clean(1.0 / sg[r].astype(float) ** 2)}
            for r in range(n_rows) if t["ROLE"][r].strip() == "target"
        ],
        "skipped": {"sky": 1, "unused": 1},
    }

# 3. One WAVE-LOG solution in the image header for every row (a rectified
#    frame), no uncertainty, target table with a text flag.
n_rows, n_pix = 4, 80
kinds = ["TARGET", "SKY", "TARGET", "TARGET"]
flux = np.array([spectrum(n_pix, 15 + 15 * r) for r in range(n_rows)], dtype=np.float32)
prim = fits.PrimaryHDU(flux)
wcs_cards = {"CTYPE1": "WAVE-LOG", "CUNIT1": "Angstrom", "CRVAL1": 5000.0, "CDELT1": 1.5, "CRPIX1": 1.0}
for k, v in wcs_cards.items():
    prim.header[k] = v
tab = fits.BinTableHDU.from_columns(
    [
        fits.Column(name="NAME", format="10A", array=["slt-0301", "sky-a", "slt-0302", "slt-0303"]),
        fits.Column(name="RA", format="D", unit="deg", array=[170.1, 170.2, 170.3, 170.4]),
        fits.Column(name="DEC", format="D", unit="deg", array=[10.1, 10.2, 10.3, 10.4]),
        fits.Column(name="OBJTYPE", format="8A", array=kinds),
    ],
    name="TARGETS",
)
fits.HDUList([prim, tab]).writeto(os.path.join(OUT, "frame_header_wcs.fits"), overwrite=True)
with fits.open(os.path.join(OUT, "frame_header_wcs.fits")) as h:
    fl, t = h[0].data, h["TARGETS"].data
    w = wcs_wave(wcs_cards, n_pix)
    files["frame_header_wcs.fits"] = {
        "rows": n_rows, "pixels": n_pix, "medium": "vacuum",
        "targets": [
            {"row": r, "id": str(t["NAME"][r]), "ra": float(t["RA"][r]), "dec": float(t["DEC"][r]),
             "wave": clean(w), "flux": clean(fl[r]), "ivar": None}
            for r in range(n_rows) if t["OBJTYPE"][r].strip() == "TARGET"
        ],
        "skipped": {"sky": 1, "unused": 0},
    }

# 4. A damaged frame: the table describes 3 rows of a 4-row image.
flux = np.array([spectrum(50, 20) for _ in range(4)], dtype=np.float32)
prim = fits.PrimaryHDU(flux)
for k, v in {"CTYPE1": "WAVE", "CUNIT1": "Angstrom", "CRVAL1": 6000.0, "CDELT1": 2.0}.items():
    prim.header[k] = v
tab = fits.BinTableHDU.from_columns(
    [fits.Column(name="ID", format="8A", array=["a", "b", "c"]),
     fits.Column(name="TYPE", format="8A", array=["TARGET"] * 3)], name="FIBRES")
fits.HDUList([prim, tab]).writeto(os.path.join(OUT, "bad", "frame_short_table.fits"), overwrite=True)

expected = {
    "_about": "written by tests/scripts/make_frame_fixtures.py with astropy "
              f"{astropy.__version__} (astropy.wcs for WCS wavelengths); wavelengths in "
              "Angstrom in the file's medium; rows 0-based; ivar null = not in the file",
    "files": files,
}
with open(os.path.join(OUT, "frames_expected.json"), "w") as fh:
    json.dump(expected, fh, indent=1)
    fh.write("\n")
print("wrote", ", ".join(files))
