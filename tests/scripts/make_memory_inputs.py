#!/usr/bin/env python3
"""Write the inputs of the bounded-memory measurement in the README (not
used by the test suite; nothing it writes is committed):

    many DIR N      N small spectra: 1-D FITS images with a linear WCS and
                    CSV tables, alternately (1000 pixels each)
    table FILE GB   one multi-object FITS binary table of about GB gigabytes:
                    one object per row, vector columns WAVE, FLUX, IVAR of
                    4000 float32 each, written row block by row block so the
                    script itself never holds the table
    frame FILE GB   one multi-object frame of about GB gigabytes: a 2-D flux
                    image (one spectrum per row), an IVAR image and a row
                    table, with one WCS in the image header

Run with astropy and numpy on the path, e.g.
    PYTHONPATH=target/reference/python python3 tests/scripts/make_memory_inputs.py many /tmp/many 10000
The data are made up (smooth continuum, one line, seeded noise).
"""
import os
import sys

import numpy as np
from astropy.io import fits

rng = np.random.default_rng(7)


def spec(n):
    x = np.linspace(0, 1, n)
    return (5 + 2 * x + rng.normal(0, 0.2, n)).astype(np.float32)


def many(out, n):
    os.makedirs(out, exist_ok=True)
    npix = 1000
    for i in range(n):
        name = os.path.join(out, f"obj-{i:05d}")
        f = spec(npix)
        if i % 2 == 0:
            h = fits.PrimaryHDU(f)
            h.header["CTYPE1"] = "WAVE"
            h.header["CUNIT1"] = "Angstrom"
            h.header["CRVAL1"] = 4000.0
            h.header["CDELT1"] = 4.0
            h.header["CRPIX1"] = 1.0
            h.header["OBJECT"] = f"obj-{i:05d}"
            h.writeto(name + ".fits", overwrite=True)
        else:
            w = 4000.0 + 4.0 * np.arange(npix)
            np.savetxt(name + ".csv", np.column_stack([w, f, np.full(npix, 0.2)]),
                       delimiter=",", header="wave,flux,err", comments="", fmt="%.6g")


def write_padded(fh, nbytes):
    pad = (-nbytes) % 2880
    fh.write(b"\0" * pad)


def table(out, gb):
    npix = 4000
    row_dtype = np.dtype([("ID", "S16"), ("WAVE", ">f4", (npix,)), ("FLUX", ">f4", (npix,)),
                          ("IVAR", ">f4", (npix,))])
    nrows = int(gb * 1e9 / row_dtype.itemsize)
    cols = [fits.Column(name="ID", format="16A"),
            fits.Column(name="WAVE", format=f"{npix}E", unit="Angstrom"),
            fits.Column(name="FLUX", format=f"{npix}E"),
            fits.Column(name="IVAR", format=f"{npix}E")]
    hdu = fits.BinTableHDU.from_columns(cols, nrows=0, name="SPECTRA")
    hdu.header["NAXIS2"] = nrows
    wave = (4000.0 + 1.5 * np.arange(npix)).astype(">f4")
    with open(out, "wb") as fh:
        fh.write(fits.PrimaryHDU().header.tostring().encode("ascii"))
        fh.write(hdu.header.tostring().encode("ascii"))
        block = 1000
        written = 0
        while written < nrows:
            k = min(block, nrows - written)
            rows = np.zeros(k, dtype=row_dtype)
            rows["ID"] = [f"t-{written + j:07d}".encode() for j in range(k)]
            rows["WAVE"] = wave
            rows["FLUX"] = 5 + rng.normal(0, 0.2, (k, npix))
            rows["IVAR"] = 25.0
            fh.write(rows.tobytes())
            written += k
        write_padded(fh, nrows * row_dtype.itemsize)
    print(f"{out}: {nrows} rows, {os.path.getsize(out) / 1e9:.2f} GB")


def frame(out, gb):
    npix = 4000
    nrows = int(gb * 1e9 / (2 * 4 * npix))
    flux_hdr = fits.ImageHDU(np.zeros((1, npix), dtype=np.float32), name="FLUX").header
    flux_hdr["NAXIS2"] = nrows
    for k, v in {"CTYPE1": "WAVE", "CUNIT1": "Angstrom", "CRVAL1": 4000.0, "CDELT1": 1.5}.items():
        flux_hdr[k] = v
    ivar_hdr = fits.ImageHDU(np.zeros((1, npix), dtype=np.float32), name="IVAR").header
    ivar_hdr["NAXIS2"] = nrows
    uses = np.where(np.arange(nrows) % 10 == 0, "SKY", "TARGET")
    tab = fits.BinTableHDU.from_columns(
        [fits.Column(name="ID", format="16A", array=[f"f-{i:07d}" for i in range(nrows)]),
         fits.Column(name="TYPE", format="8A", array=uses)], name="FIBRES")
    with open(out, "wb") as fh:
        fh.write(fits.PrimaryHDU().header.tostring().encode("ascii"))
        for hdr, fill in ((flux_hdr, None), (ivar_hdr, 25.0)):
            fh.write(hdr.tostring().encode("ascii"))
            block = 1000
            for start in range(0, nrows, block):
                k = min(block, nrows - start)
                a = np.full((k, npix), fill, dtype=">f4") if fill else (5 + rng.normal(0, 0.2, (k, npix))).astype(">f4")
                fh.write(a.tobytes())
            write_padded(fh, nrows * npix * 4)
    with open(out, "ab") as fh:
        fh.write(tab.header.tostring().encode("ascii"))
        fh.write(np.asarray(tab.data).tobytes())
        write_padded(fh, len(np.asarray(tab.data).tobytes()))
    print(f"{out}: {nrows} rows, {os.path.getsize(out) / 1e9:.2f} GB")


if __name__ == "__main__":
    mode = sys.argv[1]
    if mode == "many":
        many(sys.argv[2], int(sys.argv[3]))
    elif mode == "table":
        table(sys.argv[2], float(sys.argv[3]))
    elif mode == "frame":
        frame(sys.argv[2], float(sys.argv[3]))
    else:
        sys.exit(__doc__)
