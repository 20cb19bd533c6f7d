#!/usr/bin/env python3
"""Write the tiny FITS/text fixtures of the io tests and record, next to
them in tests/data/io/expected.json, what a reference library (astropy,
numpy) reads from them: wavelengths (from astropy.wcs for image WCS, or the
table columns), flux, inverse variance and the bad-pixel mask.

Run from the repository root:  python3 tests/scripts/make_io_fixtures.py
The data are made up (smooth continuum + one line + seeded noise); they are
ours and are committed together with this script.
"""
import json
import os
import warnings

import numpy as np
from astropy.io import fits
from astropy.wcs import WCS

OUT = os.path.join(os.path.dirname(__file__), "..", "data", "io")
BAD = os.path.join(OUT, "bad")
rng = np.random.default_rng(20261202)
expected = {"_about": "written by tests/scripts/make_io_fixtures.py with astropy "
            "(astropy.wcs for image wavelengths); wavelengths in Angstrom in the "
            "file's medium; ivar null = unusable pixel", "files": {}}


def clean(a):
    return [None if not np.isfinite(x) else float(x) for x in np.asarray(a, dtype=float)]


def flux_for(n, line_at=None):
    x = np.linspace(0, 1, n)
    f = 10 + 3 * x + rng.normal(0, 0.3, n)
    if line_at is not None:
        f += 8 * np.exp(-0.5 * ((np.arange(n) - line_at) / 1.5) ** 2)
    return f.astype(np.float32)


def wcs_wave(header, n):
    """Wavelengths of pixels 0..n-1 (0-based) by astropy.wcs, in Angstrom.
    wcslib works in SI: WAVE axes come back in metres."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        w = WCS(header)
    world = w.all_pix2world(np.arange(n, dtype=float), 0)[0]
    unit = str(w.wcs.cunit[0])
    if unit == "m":
        return world * 1e10
    if unit in ("", "Angstrom"):
        return world
    raise ValueError("unexpected unit " + unit)


def record(name, objects):
    expected["files"][name] = objects


def obj(id_, wave, flux, ivar=None, bad=None, medium="vacuum", hdu=None, row=None,
        noise_estimated=False, flux_unit=None):
    n = len(flux)
    flux = np.asarray(flux, dtype=float)
    if ivar is None:
        iv = np.ones(n)
    else:
        iv = np.asarray(ivar, dtype=float)
    good = np.isfinite(flux) & np.isfinite(iv) & (iv > 0)
    if bad is not None:
        good &= ~np.asarray(bad, dtype=bool)
    return {"id": id_, "hdu": hdu, "row": row, "medium": medium,
            "noise_estimated": noise_estimated, "flux_unit": flux_unit,
            "wave": clean(wave), "flux": clean(flux),
            "ivar": None if ivar is None else clean(np.where(good, iv, np.nan)),
            "good": [bool(g) for g in good]}


def image_fixture(name, n, cards, obj_id, medium="vacuum", wave_fn=None, flux=None):
    flux = flux_for(n, line_at=n // 2) if flux is None else flux
    h = fits.PrimaryHDU(flux)
    for k, v in cards.items():
        h.header[k] = v
    h.header["OBJECT"] = obj_id
    h.header["BUNIT"] = "1e-17 erg/s/cm2/Angstrom"
    h.writeto(os.path.join(OUT, name), overwrite=True)
    hdr = fits.getheader(os.path.join(OUT, name))
    wave = wave_fn(hdr, n) if wave_fn else wcs_wave(hdr, n)
    record(name, [obj(obj_id, wave, flux, medium=medium, hdu=0, noise_estimated=True,
                      flux_unit="1e-17 erg/s/cm2/Angstrom")])
    return flux


def main():
    os.makedirs(BAD, exist_ok=True)

    # 1. linear WCS in Angstrom (FITS WCS Paper I/III: CTYPE1 WAVE)
    image_fixture("img_linear.fits", 48,
                  {"CTYPE1": "WAVE", "CUNIT1": "Angstrom", "CRVAL1": 4000.0,
                   "CDELT1": 2.5, "CRPIX1": 1.0}, "lin-1")

    # 2. WAVE-LOG (Paper III eq. 5), reference pixel inside the array
    image_fixture("img_wavelog.fits", 48,
                  {"CTYPE1": "WAVE-LOG", "CUNIT1": "Angstrom", "CRVAL1": 5000.0,
                   "CDELT1": 1.2, "CRPIX1": 10.0}, "log-1")

    # 3. DC-FLAG = 1: log10 lambda linear in pixels. astropy.wcs does not know
    #    DC-FLAG, so it gives the linear log10 axis and numpy exponentiates.
    def dcflag_wave(hdr, n):
        h = hdr.copy()
        for k in ("DC-FLAG", "CUNIT1"):
            h.remove(k, ignore_missing=True)
        h["CTYPE1"] = "LINEAR"
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            w = WCS(h)
        return 10 ** w.all_pix2world(np.arange(n, dtype=float), 0)[0]
    image_fixture("img_dcflag.fits", 48,
                  {"CTYPE1": "LINEAR", "CRVAL1": 3.6, "CDELT1": 1e-4, "CRPIX1": 1.0,
                   "DC-FLAG": 1}, "dc-1", wave_fn=dcflag_wave)

    # 4. CUNIT nm, step in CD1_1, no CRPIX1 (zvet takes CRPIX1 = 1 when absent,
    #    as the issue asks; the FITS standard's default is 0, so the expected
    #    wavelengths are computed by astropy with CRPIX1 = 1 written in).
    def nm_wave(hdr, n):
        h = hdr.copy()
        h["CRPIX1"] = 1.0
        return wcs_wave(h, n)
    image_fixture("img_nm_cd.fits", 40,
                  {"CTYPE1": "WAVE", "CUNIT1": "nm", "CRVAL1": 650.0, "CD1_1": 0.25},
                  "nm-1", wave_fn=nm_wave)

    # 5. AWAV: air wavelengths (Paper III)
    image_fixture("img_awav.fits", 40,
                  {"CTYPE1": "AWAV", "CUNIT1": "Angstrom", "CRVAL1": 6540.0,
                   "CDELT1": 1.0, "CRPIX1": 1.0}, "air-1", medium="air")

    # 6. flux + IVAR and MASK extensions
    n = 36
    flux = flux_for(n, line_at=20)
    flux[3] = np.nan
    ivar = (1.0 / 0.3 ** 2 * np.ones(n)).astype(np.float32)
    ivar[7] = 0.0
    mask = np.zeros(n, dtype=np.int16)
    mask[[10, 11]] = 4
    p = fits.PrimaryHDU(flux)
    p.header.update({"CTYPE1": "WAVE", "CUNIT1": "Angstrom", "CRVAL1": 5500.0,
                     "CDELT1": 1.5, "CRPIX1": 1.0, "OBJECT": "ext-1"})
    hl = fits.HDUList([p, fits.ImageHDU(ivar, name="IVAR"), fits.ImageHDU(mask, name="MASK")])
    hl.writeto(os.path.join(OUT, "img_ivar_ext.fits"), overwrite=True)
    hdr = fits.getheader(os.path.join(OUT, "img_ivar_ext.fits"))
    record("img_ivar_ext.fits", [obj("ext-1", wcs_wave(hdr, n), flux, ivar, mask != 0, hdu=0)])

    # 6b. one spectrum as a stack of bands named by BANDIDn (flux, sky, sigma),
    #     log-linear axis by DC-FLAG, step in CD1_1
    n = 40
    flux = flux_for(n, line_at=18)
    sky = np.full(n, 3.0, dtype=np.float32)
    sig = np.full(n, 0.35, dtype=np.float32)
    sig[5] = 0.0
    p = fits.PrimaryHDU(np.array([flux, sky, sig]))
    p.header.update({"CTYPE1": "LINEAR", "CRVAL1": 3.7, "CD1_1": 2e-4, "CRPIX1": 1.0, "DC-FLAG": 1,
                     "BANDID1": "spectrum - background fit", "BANDID2": "background fit",
                     "BANDID3": "sigma - error estimate", "OBJECT": "bands-1"})
    p.writeto(os.path.join(OUT, "img_bands.fits"), overwrite=True)
    hdr = fits.getheader(os.path.join(OUT, "img_bands.fits"))
    h1 = fits.Header({k: hdr[k] for k in ("CRVAL1", "CD1_1", "CRPIX1")})
    h1["CTYPE1"] = "LINEAR"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        w = WCS(h1)
    wave = 10 ** w.all_pix2world(np.arange(n, dtype=float), 0)[0]
    with np.errstate(divide="ignore"):
        iv = 1.0 / sig.astype(float) ** 2
    record("img_bands.fits", [obj("bands-1", wave, flux, iv, hdu=0)])

    # 6c. a gzip-compressed copy of the linear image (read directly by the FITS library)
    import gzip
    import shutil
    with open(os.path.join(OUT, "img_linear.fits"), "rb") as src, \
            gzip.GzipFile(os.path.join(OUT, "img_linear_gz.fits.gz"), "wb", mtime=0) as dst:
        shutil.copyfileobj(src, dst)
    record("img_linear_gz.fits.gz", expected["files"]["img_linear.fits"])

    # 7. one pixel per row, sigma column, wavelength in Angstrom (double)
    n = 50
    wave = np.linspace(3800.0, 4290.0, n)
    flux = flux_for(n, line_at=25)
    sig = (0.2 + 0.01 * np.arange(n)).astype(np.float32)
    t = fits.BinTableHDU.from_columns([
        fits.Column(name="WAVELENGTH", format="D", unit="Angstrom", array=wave),
        fits.Column(name="FLUX", format="E", unit="erg/s/cm2/A", array=flux),
        fits.Column(name="ERROR", format="E", unit="erg/s/cm2/A", array=sig)], name="SPEC")
    t.header["OBJECT"] = "pix-1"
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(OUT, "tab_pixel_sigma.fits"), overwrite=True)
    d = fits.getdata(os.path.join(OUT, "tab_pixel_sigma.fits"), 1)
    record("tab_pixel_sigma.fits", [obj("pix-1", d["WAVELENGTH"], d["FLUX"],
                                        1.0 / d["ERROR"].astype(float) ** 2, hdu=1,
                                        flux_unit="erg/s/cm2/A")])

    # 8. one object per row: vector loglam / flux / ivar, id column, 3 objects
    npix, nobj = 40, 3
    loglam = np.array([3.55 + 1e-4 * np.arange(npix) + 2e-3 * k for k in range(nobj)], dtype=np.float32)
    fl = np.array([flux_for(npix, line_at=10 + 5 * k) for k in range(nobj)])
    iv = np.full((nobj, npix), 4.0, dtype=np.float32)
    iv[1, 5] = 0.0
    ids = np.array(["obj-a", "obj-b", "obj-c"])
    t = fits.BinTableHDU.from_columns([
        fits.Column(name="OBJID", format="10A", array=ids),
        fits.Column(name="LOGLAM", format=f"{npix}E", array=loglam),
        fits.Column(name="FLUX", format=f"{npix}E", array=fl),
        fits.Column(name="IVAR", format=f"{npix}E", array=iv),
        fits.Column(name="RA", format="D", array=np.array([10.0, 10.5, 11.0])),
        fits.Column(name="DEC", format="D", array=np.array([-5.0, -5.5, -6.0]))], name="SPECTRA")
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(OUT, "tab_vector_loglam.fits"), overwrite=True)
    d = fits.getdata(os.path.join(OUT, "tab_vector_loglam.fits"), 1)
    record("tab_vector_loglam.fits", [
        obj(str(d["OBJID"][k]), 10.0 ** d["LOGLAM"][k].astype(float), d["FLUX"][k], d["IVAR"][k], hdu=1, row=k)
        for k in range(nobj)])

    # 9. vector table with a sigma column, no id column: ids are stem#row
    npix, nobj = 30, 2
    wave = np.array([np.linspace(6000.0, 6290.0, npix)] * nobj)
    fl = np.array([flux_for(npix, line_at=12) for _ in range(nobj)])
    sg = np.full((nobj, npix), 0.5, dtype=np.float32)
    t = fits.BinTableHDU.from_columns([
        fits.Column(name="wave", format=f"{npix}D", unit="Angstrom", array=wave),
        fits.Column(name="flux", format=f"{npix}E", array=fl),
        fits.Column(name="sigma", format=f"{npix}E", array=sg)])
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(OUT, "tab_vector_sigma.fits"), overwrite=True)
    d = fits.getdata(os.path.join(OUT, "tab_vector_sigma.fits"), 1)
    record("tab_vector_sigma.fits", [
        obj(f"tab_vector_sigma#{k}", d["wave"][k], d["flux"][k], 1.0 / d["sigma"][k].astype(float) ** 2, hdu=1, row=k)
        for k in range(nobj)])

    # 10. pixel table with ivar and a quality column (non-zero = bad)
    n = 32
    wave = np.linspace(7000.0, 7310.0, n)
    flux = flux_for(n)
    iv = np.full(n, 9.0, dtype=np.float32)
    q = np.zeros(n, dtype=np.int32)
    q[[0, 15, 16]] = [1, 2, 1024]
    t = fits.BinTableHDU.from_columns([
        fits.Column(name="Lambda", format="D", array=wave),
        fits.Column(name="Flux", format="E", array=flux),
        fits.Column(name="Ivar", format="E", array=iv),
        fits.Column(name="Quality", format="J", array=q)])
    t.header["OBJECT"] = "mask-1"
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(OUT, "tab_mask.fits"), overwrite=True)
    d = fits.getdata(os.path.join(OUT, "tab_mask.fits"), 1)
    record("tab_mask.fits", [obj("mask-1", d["Lambda"], d["Flux"], d["Ivar"], d["Quality"] != 0, hdu=1)])

    # 11. pixel table whose wavelength column carries the IVOA UCD for air, in nm
    n = 30
    wave_nm = np.linspace(486.0, 487.45, n)
    flux = flux_for(n, line_at=14)
    err = np.full(n, 0.25, dtype=np.float32)
    cols = fits.ColDefs([
        fits.Column(name="WAVE", format="D", unit="nm", array=wave_nm),
        fits.Column(name="FLUX", format="E", array=flux),
        fits.Column(name="ERR", format="E", array=err)])
    t = fits.BinTableHDU.from_columns(cols)
    t.header["TUCD1"] = "em.wl;obs.atmos"
    t.header["OBJECT"] = "ucd-air-1"
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(OUT, "tab_tucd_air.fits"), overwrite=True)
    d = fits.getdata(os.path.join(OUT, "tab_tucd_air.fits"), 1)
    record("tab_tucd_air.fits", [obj("ucd-air-1", d["WAVE"] * 10.0, d["FLUX"],
                                     1.0 / d["ERR"].astype(float) ** 2, medium="air", hdu=1)])

    # 12. text: CSV with a header and units; whitespace with a commented header
    n = 25
    wave = np.linspace(500.0, 512.0, n)  # nm
    flux = flux_for(n)
    err = np.full(n, 0.4)
    with open(os.path.join(OUT, "text_spec.csv"), "w") as fh:
        fh.write("wave[nm],flux,flux_err\n")
        for w, f, e in zip(wave, flux, err):
            fh.write(f"{w:.4f},{f:.6f},{e:.3f}\n")
    record("text_spec.csv", [obj("text_spec", np.round(wave, 4) * 10.0, np.round(flux.astype(float), 6),
                                 1.0 / np.round(err, 3) ** 2)])
    n = 20
    wave = np.linspace(4100.0, 4195.0, n)
    flux = flux_for(n).astype(float)
    flux[4] = np.nan
    iv = np.full(n, 2.0)
    with open(os.path.join(OUT, "text_spec_ws.txt"), "w") as fh:
        fh.write("# an invented test spectrum\n# wavelength flux ivar\n")
        for w, f, v in zip(wave, flux, iv):
            fh.write(f"{w:10.3f} {'nan' if not np.isfinite(f) else f'{f:.6f}'} {v:.1f}\n")
    record("text_spec_ws.txt", [obj("text_spec_ws", np.round(wave, 3), np.round(flux, 6), iv)])

    # ---- bad files: each must give its own error ----
    # truncated: a valid table file cut in the middle of its data
    raw = open(os.path.join(OUT, "tab_pixel_sigma.fits"), "rb").read()
    open(os.path.join(BAD, "truncated.fits"), "wb").write(raw[: 2 * 2880 + 700])
    # wrong column type: wavelength as text
    t = fits.BinTableHDU.from_columns([
        fits.Column(name="WAVE", format="8A", array=np.array(["4000.0", "4001.0", "4002.0"])),
        fits.Column(name="FLUX", format="E", array=np.array([1, 2, 3], dtype=np.float32))])
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(BAD, "wrong_column_type.fits"), overwrite=True)
    # mismatched lengths: 20 wavelengths, 25 fluxes per row
    t = fits.BinTableHDU.from_columns([
        fits.Column(name="WAVE", format="20D", array=np.tile(np.linspace(4000, 4019, 20), (2, 1))),
        fits.Column(name="FLUX", format="25E", array=np.ones((2, 25), dtype=np.float32))])
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(BAD, "mismatched_lengths.fits"), overwrite=True)
    # all-NaN flux in an otherwise valid image
    p = fits.PrimaryHDU(np.full(16, np.nan, dtype=np.float32))
    p.header.update({"CTYPE1": "WAVE", "CUNIT1": "Angstrom", "CRVAL1": 4000.0, "CDELT1": 1.0})
    p.writeto(os.path.join(BAD, "all_nan_flux.fits"), overwrite=True)
    # unknown CUNIT1
    p = fits.PrimaryHDU(np.ones(16, dtype=np.float32))
    p.header.update({"CTYPE1": "WAVE", "CUNIT1": "furlong", "CRVAL1": 4000.0, "CDELT1": 1.0})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        p.writeto(os.path.join(BAD, "unknown_cunit.fits"), overwrite=True)
    # empty table with the right columns
    t = fits.BinTableHDU.from_columns([
        fits.Column(name="WAVE", format="D", array=np.zeros(0)),
        fits.Column(name="FLUX", format="E", array=np.zeros(0, dtype=np.float32))])
    fits.HDUList([fits.PrimaryHDU(), t]).writeto(os.path.join(BAD, "empty_table.fits"), overwrite=True)
    # a 1-D image without any spectral WCS
    fits.PrimaryHDU(np.ones(16, dtype=np.float32)).writeto(os.path.join(BAD, "no_wcs.fits"), overwrite=True)
    expected["bad"] = {
        "no_wcs.fits": "NoSpectrum",
        "truncated.fits": "Truncated",
        "wrong_column_type.fits": "ColumnType",
        "mismatched_lengths.fits": "LengthMismatch",
        "all_nan_flux.fits": "NoGoodPixels",
        "unknown_cunit.fits": "UnknownUnit",
        "empty_table.fits": "EmptyTable",
    }

    with open(os.path.join(OUT, "expected.json"), "w") as fh:
        json.dump(expected, fh, separators=(",", ":"))
        fh.write("\n")


if __name__ == "__main__":
    main()
