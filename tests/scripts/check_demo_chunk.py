#!/usr/bin/env python3
"""Read one spectrum file of `zvet demo --write DIR --objects N` with astropy
and print what it sees as JSON (run by tests/scale.rs through
tests/support/mod.rs::run_reference_script; nothing is recorded).

Usage: python3 tests/scripts/check_demo_chunk.py FILE
"""
import json
import sys

import numpy as np
from astropy.io import fits
from astropy.table import Table

path = sys.argv[1]
with fits.open(path) as hdul:
    hdr = hdul["SPECTRA"].header
    table = Table.read(hdul["SPECTRA"])
rows = []
for r in table:
    wave = np.asarray(r["WAVE"], dtype=float)
    flux = np.asarray(r["FLUX"], dtype=float)
    mask = np.asarray(r["MASK"])
    rows.append(
        {
            "id": str(r["OBJID"]).strip(),
            "ra": float(r["RA"]),
            "dec": float(r["DEC"]),
            "n": int(wave.size),
            "wave_first": float(wave[0]),
            "wave_last": float(wave[-1]),
            "flux_head": [float(x) for x in flux[:5]],
            "flux_sum": float(flux.sum()),
            "bad": int((mask != 0).sum()),
            "wave_increasing": bool(np.all(np.diff(wave) > 0)),
        }
    )
print(
    json.dumps(
        {
            "nrows": len(table),
            "columns": list(table.colnames),
            "bunit": hdr.get("BUNIT"),
            "airorvac": hdr.get("AIRORVAC"),
            "rows": rows,
        }
    )
)
