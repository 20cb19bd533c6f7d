#!/usr/bin/env python3
"""Read zvet's training-catalogue export with astropy and record what it sees.

Usage (from the repository root):
    cargo test --no-default-features --test integration records::export::export_fixture_for_astropy
    PYTHONPATH=target/reference/python python3 tests/scripts/check_export_astropy.py
    cargo test --no-default-features --test integration records::export::export_fixture_for_astropy

The first command writes target/test-scratch/astropy_export/sample.{fits,csv}
(the fixed rows of tests/records/export.rs::sample_rows). This script opens them with
astropy.table.Table.read, checks the basics itself (it exits non-zero on a
failure), and records per column the numpy dtype kind and item size, the unit,
which entries astropy masks, and the values, plus the header keywords, into
tests/data/records/astropy_export.json. The Rust test
records::export::export_matches_astropy_view compares that file with what the current
writer puts into the table, and records::export::export_fixture_for_astropy compares the
TFORM/TUNIT/TNULL cards and provenance keywords of a file it writes now with it, so CI
needs no astropy.
"""
import json
import math
import pathlib
import sys

import astropy
import numpy as np
from astropy.io import fits
from astropy.table import Table

ROOT = pathlib.Path(__file__).resolve().parents[2]
SRC = ROOT / "target" / "test-scratch" / "astropy_export"
OUT = ROOT / "tests" / "data" / "records" / "astropy_export.json"


def plain(v):
    if isinstance(v, (np.floating, float)):
        return None if math.isnan(v) else float(v)
    if isinstance(v, (np.integer, int)):
        return int(v)
    if isinstance(v, bytes):
        return v.decode("ascii")
    return str(v)


def main():
    t = Table.read(SRC / "sample.fits", hdu="ZVET_CATALOG")
    cols = []
    for name in t.colnames:
        c = t[name]
        mask = list(map(bool, np.ma.getmaskarray(c)))
        data = np.ma.getdata(c)
        cols.append({
            "name": name,
            "kind": c.dtype.kind,
            "itemsize": int(c.dtype.itemsize),
            "unit": None if c.unit is None else c.unit.to_string(),
            "masked": mask,
            "values": [plain(v) for v in data],
        })
    # Units must be real astropy units, not unparsed strings.
    assert t["ra"].unit.physical_type == "angle", t["ra"].unit
    assert t["mag_r"].unit.to_string() == "mag", t["mag_r"].unit
    assert t["line_halpha_ew"].unit.physical_type == "length", t["line_halpha_ew"].unit
    assert (t["vetted_z"].dtype.kind, t["vetted_z"].dtype.itemsize) == ("f", 8)
    assert (t["confidence_level"].dtype.kind, t["confidence_level"].dtype.itemsize) == ("i", 2)
    assert t["note"].dtype.kind in "SU"
    # TNULL = 0 masks a missing confidence level; NaN masks a missing float.
    assert bool(np.ma.getmaskarray(t["confidence_level"])[2])
    assert bool(np.ma.getmaskarray(t["vetted_z"])[2])

    with fits.open(SRC / "sample.fits") as hdul:
        h = hdul["ZVET_CATALOG"].header
        keys = {k: h[k] for k in ["CREATOR", "ZVETVER", "DATE", "CAMPAIGN", "TEMPLSET",
                                  "ZMETHOD", "ZCLASSES", "MINCONF", "EXCLFLAG", "DLOGLAM",
                                  "ZGALMIN", "ZGALMAX", "ZQSOMIN", "ZQSOMAX", "ZSTARMIN",
                                  "ZSTARMAX", "ZTOL", "MINSEPKM", "NPOLY", "NCAND", "MASKSKY", "NONNEG"]}
        tforms = {h[f"TTYPE{i}"]: h[f"TFORM{i}"] for i in range(1, h["TFIELDS"] + 1)}
        # The unit and null cards as written (absent: null).
        tunits = {h[f"TTYPE{i}"]: h.get(f"TUNIT{i}") for i in range(1, h["TFIELDS"] + 1)}
        tnulls = {h[f"TTYPE{i}"]: h.get(f"TNULL{i}") for i in range(1, h["TFIELDS"] + 1)}
        # Raises on any violation of the FITS standard that astropy checks.
        hdul.verify("exception")

    c = Table.read(SRC / "sample.csv", format="ascii.csv", comment="#")
    csv_view = {
        "colnames": c.colnames,
        "n_rows": len(c),
        "id": [str(x) for x in c["id"]],
        "vetted_z": [None if np.ma.is_masked(x) else float(x) for x in c["vetted_z"]],
        "note": [None if np.ma.is_masked(x) else str(x) for x in c["note"]],
    }

    out = {
        "source": f"astropy {astropy.__version__}, numpy {np.__version__}: "
                  "astropy.table.Table.read on target/test-scratch/astropy_export/sample.{fits,csv}",
        "n_rows": len(t),
        "columns": cols,
        "header": keys,
        "tform": tforms,
        "tunit": tunits,
        "tnull": tnulls,
        "csv": csv_view,
    }
    OUT.write_text(json.dumps(out, indent=1, ensure_ascii=False) + "\n")
    print(f"wrote {OUT}: {len(t)} rows, {len(cols)} columns")


if __name__ == "__main__":
    sys.exit(main())
