#!/usr/bin/env python3
"""The empirical band-shape correction of the generated M-dwarf templates.

The generated M dwarfs (src/templates/stars_cool.rs) place their molecular
bands at the published heads with published index strengths, but the band
shapes (single exponential tails) misplace where the flux goes between and
within the bands by tens of per cent. This script measures, for M0V ... M9V,
the ratio of an observed mean spectrum of the type (M0V-M6V: the library of
Pickles 1998; M7V-M9V, which that library lacks: the means of Bochanski et
al. 2007, vacuum wavelengths, at rest) to the built-in template of the same
type, in bins of BIN Å
(vacuum), and writes it as the Rust table src/templates/m_dwarf_table.rs. One
bin spans 6800-7150 Å, where the TiO5, CaH2 and CaH3 windows lie, so that a
constant factor there leaves the calibrated indices unchanged.

The table in the code is the product of the ratios of successive passes: with
a table path as third argument the script multiplies that table by what it
measures (run it on templates built with that table in place); without one it
writes the measured ratio alone (run it on templates built with the
correction off, i.e. a table of ones). Independent checks of the result are
the single M dwarfs of Kesseli et al. (2019) and the M8 dwarf in
tests/stars.rs, which this script does not read.

    cargo run --release -- templates build --out target/tpl
    python3 scripts/m-dwarf-correction.py target/tpl/builtin.fits \
        target/reference/kastredux-1.1.4/kastredux/resources/telluric_standards \
        src/templates/m_dwarf_table.rs > new_table.rs

(the library folder is the one the integration tests fetch with pip:
`kastredux==1.1.4`; needs numpy and astropy).
"""
import glob
import os
import re
import sys

import numpy as np
from astropy.io import fits

TYPES = ["M0V", "M1V", "M2V", "M3V", "M4V", "M5V", "M6V", "M7V", "M8V", "M9V"]
# the types the first library lacks, read from its sibling folder of spectral standards
LATE = {"M7V": "M70_", "M8V": "M80_", "M9V": "M90_"}
# a bin whose mean flux has S/N below this (the late means are faint in the
# blue) takes the factor of the nearest bin above it
MIN_BIN_SNR = 20.0
# bin width (Å): 25 Å resolves the shapes of the TiO and CaH bands (a 100 Å
# table left 0.13 of rms ln ratio on smaller scales against the single M4
# dwarf, a 25 Å one 0.08; the library's own spectra sit at 0.07)
BIN = 25.0
FLAT = (6800.0, 7150.0)
# knots (vacuum Å): bin centres from 3800 to 9700, none inside the flat index zone
KNOTS = [k for k in np.arange(3800.0, 9700.0 + BIN / 2, BIN) if not FLAT[0] <= k <= FLAT[1]]


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


def edges(k):
    """The bin of knot `k`, clipped at the flat index zone."""
    lo, hi = k - BIN / 2, k + BIN / 2
    if k < FLAT[0]:
        hi = min(hi, FLAT[0])
    else:
        lo = max(lo, FLAT[1])
    return lo, hi


def previous(path):
    """The rows of a table this script wrote: [(values, flat)] per type."""
    text = open(path).read()
    rows = re.findall(r"\(\s*\[([^\]]*)\],\s*([0-9.eE+-]+),?\s*\)", text)
    return [([float(v) for v in vals.replace("\n", " ").split(",") if v.strip()], float(flat))
            for vals, flat in rows]


def main():
    hdus = fits.open(sys.argv[1])
    folder = sys.argv[2]
    before = previous(sys.argv[3]) if len(sys.argv) > 3 else None
    rows = []
    for n, t in enumerate(TYPES):
        if t in LATE:
            spectral = os.path.join(os.path.dirname(os.path.normpath(folder)), "spectral_standards")
            d = np.loadtxt(sorted(glob.glob(f"{spectral}/{LATE[t]}*_bochanski2007.txt"))[0], comments="#")
            w, f, e = d[:, 0], d[:, 1], d[:, 2]
        else:
            d = np.loadtxt(f"{folder}/{t}_pickles1998.txt", comments="#")
            # no errors in the library: 2 % of the flux
            w, f = air_to_vacuum(d[:, 0]), d[:, 1]
            e = 0.02 * np.abs(f)
        lam, tf = template(hdus, "star-" + t[:2])
        m = (w > 3700) & (w < 9800) & (e > 0) & np.isfinite(f)
        w, f, e = w[m], f[m], e[m]
        tt = np.interp(w, lam, tf)
        # one overall scale (weighted least squares)
        s = np.sum(f * tt / e**2) / np.sum(tt * tt / e**2)
        # per bin the ratio of the mean fluxes, and its S/N
        def ratio_in(sel):
            if not sel.any():
                return None
            snr = np.sum(f[sel]) / np.sqrt(np.sum(e[sel] ** 2))
            return float(np.sum(f[sel]) / np.sum(s * tt[sel])) if snr >= MIN_BIN_SNR else None
        row = [ratio_in((w >= lo) & (w < hi)) for lo, hi in map(edges, KNOTS)]
        ok = [i for i, v in enumerate(row) if v is not None]
        row = [v if v is not None else row[min(ok, key=lambda j: abs(j - i))] for i, v in enumerate(row)]
        flat = ratio_in((w >= FLAT[0]) & (w < FLAT[1]))
        if before is not None:
            if n >= len(before):
                # a type the table does not hold yet: its template had no correction
                before.append(([1.0] * len(row), 1.0))
            assert len(before[n][0]) == len(row), "the table was written with other knots"
            row = [a * b for a, b in zip(before[n][0], row)]
            flat *= before[n][1]
        rows.append((t, row, flat))
        dev = np.abs(np.log(np.array(row + [flat])))
        print(f"# {t}: largest |ln factor| {dev.max():.3f}, rms {np.sqrt(np.mean(dev**2)):.3f}", file=sys.stderr)
    out = ["// Generated by scripts/m-dwarf-correction.py: do not edit by hand.",
           "//! The factors of `stars_cool::m_dwarf_correction`: the observed library",
           "//! mean spectra of M0V–M6V (Pickles 1998) and M7V–M9V (Bochanski et al.",
           "//! 2007) over the generated templates, in",
           f"//! {BIN:.0f} Å bins (vacuum), one constant over the flat index zone.",
           "",
           "/// Knots (vacuum Å): bin centres, none inside [`M_DWARF_FLAT`].",
           f"pub const M_DWARF_KNOTS: [f64; {len(KNOTS)}] = ["]
    for i in range(0, len(KNOTS), 12):
        out.append("    " + " ".join(f"{k:.1f}," for k in KNOTS[i:i + 12]))
    out += ["];",
            "/// The zone (vacuum Å) of the TiO5, CaH2 and CaH3 windows, where the",
            "/// correction is one constant so that the calibrated indices stay as solved.",
            f"pub const M_DWARF_FLAT: (f64, f64) = ({FLAT[0]:.1f}, {FLAT[1]:.1f});",
            "/// Factor per subtype M0–M9 at each of [`M_DWARF_KNOTS`], then the factor",
            "/// over [`M_DWARF_FLAT`].",
            f"pub static M_DWARF_CORRECTION: [([f64; {len(KNOTS)}], f64); {len(TYPES)}] = ["]
    for t, row, flat in rows:
        out.append(f"    // {t}")
        out.append("    (")
        out.append("        [")
        for i in range(0, len(row), 12):
            out.append("            " + " ".join(f"{v:.3f}," for v in row[i:i + 12]))
        out.append("        ],")
        out.append(f"        {flat:.3f},")
        out.append("    ),")
    out.append("];")
    print("\n".join(out))


if __name__ == "__main__":
    main()
