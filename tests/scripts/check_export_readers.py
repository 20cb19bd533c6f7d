#!/usr/bin/env python3
"""Open zvet's training-catalogue exports with pandas and astropy, the way a
user would (no options), and print what they read as one JSON document.

Usage:  python3 tests/scripts/check_export_readers.py CAT.csv CAT.ecsv CAT.fits

The Rust test records::export_readers::exports_open_in_pandas_and_astropy
writes the three files, runs this script with the pinned reference libraries
(tests/support/mod.rs installs them into target/reference/python/) and
compares the JSON with what it wrote. This script checks only that the
readers succeed; every comparison is in the Rust test.

Read exactly as a user would:
  pandas.read_csv(CSV)          -- no arguments but the path
  astropy.table.Table.read(CSV) -- format from the extension
  astropy.table.Table.read(ECSV)
  astropy.table.Table.read(FITS, hdu="ZVET_CATALOG")
"""
import json
import math
import sys

import astropy
import numpy as np
import pandas as pd
from astropy.io import fits
from astropy.table import Table


def plain(v):
    """A JSON-able scalar; missing (NaN, masked) as None."""
    if v is None or v is np.ma.masked:
        return None
    if isinstance(v, (np.floating, float)):
        return None if math.isnan(v) else float(v)
    if isinstance(v, (np.integer, int)) and not isinstance(v, bool):
        return int(v)
    if isinstance(v, bytes):
        return v.decode("utf-8")
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    return str(v)


def astropy_view(t):
    cols = {}
    for name in t.colnames:
        c = t[name]
        mask = np.ma.getmaskarray(c)
        data = np.ma.getdata(c)
        cols[name] = {
            "dtype_kind": c.dtype.kind,
            "itemsize": int(c.dtype.itemsize),
            "unit": None if c.unit is None else c.unit.to_string(),
            "physical_type": None if c.unit is None else str(c.unit.physical_type),
            "description": c.description,
            "values": [None if m else plain(v) for v, m in zip(data, mask)],
        }
    return {"colnames": list(t.colnames), "n_rows": len(t), "columns": cols}


def main():
    csv_path, ecsv_path, fits_path = sys.argv[1:4]
    df = pd.read_csv(csv_path)
    pandas_view = {
        "columns": list(df.columns),
        "n_rows": int(len(df)),
        "dtypes": {k: str(v) for k, v in df.dtypes.items()},
        "values": {k: [plain(None if pd.isna(x) else x) for x in df[k].tolist()] for k in df.columns},
    }
    t_csv = Table.read(csv_path)
    t_ecsv = Table.read(ecsv_path)
    t_fits = Table.read(fits_path, hdu="ZVET_CATALOG")
    with fits.open(fits_path) as hdul:
        # Raises on any violation of the FITS standard that astropy checks.
        hdul.verify("exception")
    out = {
        "source": f"astropy {astropy.__version__}, pandas {pd.__version__}, numpy {np.__version__}",
        "pandas_csv": pandas_view,
        "astropy_csv": astropy_view(t_csv),
        "astropy_ecsv": dict(astropy_view(t_ecsv), meta=dict(t_ecsv.meta)),
        "astropy_fits": astropy_view(t_fits),
    }
    json.dump(out, sys.stdout, ensure_ascii=False)
    sys.stdout.write("\n")


if __name__ == "__main__":
    sys.exit(main())
