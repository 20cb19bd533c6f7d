#!/usr/bin/env python3
"""The empirical pseudo-continuum correction of the generated M-dwarf templates.

The generated M dwarfs (src/templates/stars_cool.rs) place their molecular
bands at the published heads with published index strengths, but the band
shapes (single exponential tails) misplace where the flux goes between the
heads by tens of per cent. This script measures, for M0V ... M6V, the ratio of
an observed library spectrum (Pickles 1998, the mean spectra of each type) to
the built-in template of the same type, in 100 Å bins (vacuum), and prints it
as the Rust table `M_DWARF_CORRECTION` of stars_cool.rs. One bin spans
6800-7150 Å, where the TiO5, CaH2 and CaH3 windows lie, so that a constant
factor there leaves the calibrated indices unchanged.

The table in the code is the product of the ratios of successive runs: run it
on templates built with the table in place and it prints the residual (the
factors it prints are then to be multiplied into the table). Independent
checks of the result are the single M dwarfs of Kesseli et al. (2019) and the
M8 dwarf in tests/stars.rs, which this script does not read.

    cargo run --release -- templates build --out target/tpl
    python3 scripts/m-dwarf-correction.py target/tpl/builtin.fits \
        target/reference/kastredux-1.1.4/kastredux/resources/telluric_standards

(the library folder is the one the integration tests fetch with pip:
`kastredux==1.1.4`; needs numpy and astropy).
"""
import sys

import numpy as np
from astropy.io import fits

TYPES = ["M0V", "M1V", "M2V", "M3V", "M4V", "M5V", "M6V"]
# knots (vacuum Å): 100 Å bins from 3800 to 9700, one flat bin over the index windows
KNOTS = [k for k in range(3800, 9800, 100) if not 6800 <= k <= 7150]
FLAT = (6800.0, 7150.0)


def air_to_vacuum(w):
    # Edlén (1966) in the form of Morton (2000), as src/spectrum/airvac.rs
    s2 = (1e4 / w) ** 2
    return w * (1 + 8.336624212083e-5 + 2.408926869968e-2 / (1.301065924522e2 - s2)
                + 1.599740894897e-4 / (3.892568793293e1 - s2))


def template(hdus, name):
    h = hdus[name].header
    i = np.arange(h["NAXIS1"])
    lam = h["CRVAL1"] * np.exp(h["CDELT1"] * (i + 1 - h["CRPIX1"]) / h["CRVAL1"])
    return lam, hdus[name].data.astype(float)


def bins():
    """(label, lo, hi) of every bin, blue to red."""
    out = []
    for k in KNOTS:
        if k == 6700:
            out.append((k, k - 50.0, FLAT[0]))
        elif k == 7200:
            out.append((FLAT, FLAT[1], k + 50.0))
        else:
            out.append((k, k - 50.0, k + 50.0))
    return out


def main():
    hdus = fits.open(sys.argv[1])
    folder = sys.argv[2]
    rows = []
    for t in TYPES:
        d = np.loadtxt(f"{folder}/{t}_pickles1998.txt", comments="#")
        w, f = air_to_vacuum(d[:, 0]), d[:, 1]
        lam, tf = template(hdus, "star-" + t[:2])
        m = (w > 3700) & (w < 9800) & (f > 0)
        w, f = w[m], f[m]
        tt = np.interp(w, lam, tf)
        # one overall scale (least squares with 2 % relative errors)
        s = np.sum(f * tt / f**2) / np.sum(tt * tt / f**2)
        ratio = f / (s * tt)
        row = []
        for k in KNOTS:
            lo, hi = (k - 50.0, k + 50.0)
            if k == 6700:
                hi = FLAT[0]
            sel = (w >= lo) & (w < hi)
            row.append(float(np.mean(ratio[sel])))
        flat = (w >= FLAT[0]) & (w < FLAT[1])
        rows.append((t, row, float(np.mean(ratio[flat]))))
    print("/// knots (vacuum Å)")
    print("const M_DWARF_KNOTS: [f64; %d] = [%s];" % (len(KNOTS), ", ".join(f"{k}.0" for k in KNOTS)))
    print("/// factor per subtype M0-M6 at each knot, then over the flat index zone")
    print("const M_DWARF_CORRECTION: [([f64; %d], f64); %d] = [" % (len(KNOTS), len(TYPES)))
    for t, row, flat in rows:
        print("    // %s" % t)
        print("    ([%s], %.3f)," % (", ".join(f"{v:.3f}" for v in row), flat))
    print("];")
    for t, row, flat in rows:
        dev = np.abs(np.log(np.array(row + [flat])))
        print(f"# {t}: largest |ln ratio| {dev.max():.3f}, rms {np.sqrt(np.mean(dev**2)):.3f}", file=sys.stderr)


if __name__ == "__main__":
    main()
