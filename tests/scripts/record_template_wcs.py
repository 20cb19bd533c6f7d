"""Record what astropy makes of the spectral WCS of the committed template set.

Reads templates-spectra/builtin.fits with astropy.io.fits and astropy.wcs and
writes tests/data/templates/astropy_wcs.json: for a few pixels of every
template extension, the wavelength (Angstrom) that astropy's implementation of
FITS WCS Paper III (CTYPE1 = 'WAVE-LOG') assigns. The Rust test
`templates::wcs_agrees_with_astropy` compares zvet's own grid with these values.

Run from the crate root:  python3 tests/scripts/record_template_wcs.py
"""
import json
import astropy
import numpy as np
from astropy.io import fits
from astropy.wcs import WCS

out = {"astropy_version": astropy.__version__, "templates": {}}
with fits.open("templates-spectra/builtin.fits") as hdul:
    for hdu in hdul[1:]:
        n = hdu.header["NAXIS1"]
        pix0 = np.array([0, 1, n // 3, n // 2, n - 1])  # zero-based pixel indices
        w = WCS(hdu.header)
        lam_m = w.pixel_to_world_values(pix0)
        unit = w.wcs.cunit[0]
        lam_ang = (np.asarray(lam_m) * unit).to("Angstrom").value
        out["templates"][hdu.name.lower()] = {
            "pixels": pix0.tolist(),
            "wave_angstrom": [float(x) for x in lam_ang],
        }
with open("tests/data/templates/astropy_wcs.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
