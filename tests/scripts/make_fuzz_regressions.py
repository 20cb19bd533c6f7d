"""Write the hand-made part of the fuzz regression corpus (tests/data/fuzz/).

Each file is one way a malformed input once aborted zvet or gave a wrong
answer; `tests/fuzz.rs::regression_corpus` replays them all. Inputs the
mutation runner finds are added beside these as it saved them
(target/fuzz/crashes/). Plain bytes, following the FITS standard 4.0
(80-byte cards, 2880-byte blocks); no library needed.

Run from the repository root: python3 tests/scripts/make_fuzz_regressions.py
"""
import os
import struct

ROOT = os.path.join("tests", "data", "fuzz")


def card(k, v):
    return f"{k:<8}= {v:>20}".ljust(80)


def header(cards):
    h = "".join(c.ljust(80) for c in cards) + "END".ljust(80)
    n = -(-len(h) // 2880) * 2880
    return h.ljust(n).encode("ascii")


def pad(b):
    return b + b"\0" * (-len(b) % 2880)


def image(n, naxis1, cdelt="1.0"):
    h = header([card("SIMPLE", "T"), card("BITPIX", "-32"), card("NAXIS", "1"),
                card("NAXIS1", naxis1), card("CTYPE1", "'WAVE    '"),
                card("CRVAL1", "4000.0"), card("CRPIX1", "1.0"), card("CDELT1", cdelt)])
    return h + pad(b"".join(struct.pack(">f", 1.0 + i % 7) for i in range(n)))


def ext():
    h = header([card("XTENSION", "'IMAGE   '"), card("BITPIX", "-32"), card("NAXIS", "1"),
                card("NAXIS1", "100"), card("PCOUNT", "0"), card("GCOUNT", "1")])
    return h + pad(b"\x3f" * 400)


def vector_table(n, tform_flux, naxis1):
    h = header([card("SIMPLE", "T"), card("BITPIX", "8"), card("NAXIS", "0")])
    h += header([card("XTENSION", "'BINTABLE'"), card("BITPIX", "8"), card("NAXIS", "2"),
                 card("NAXIS1", str(naxis1)), card("NAXIS2", "1"), card("PCOUNT", "0"),
                 card("GCOUNT", "1"), card("TFIELDS", "2"), card("TTYPE1", "'WAVE    '"),
                 card("TFORM1", f"'{n}D'"), card("TTYPE2", "'FLUX    '"),
                 card("TFORM2", f"'{tform_flux}'")])
    data = b"".join(struct.pack(">d", 4000.0 + i) for i in range(n))
    data += b"".join(struct.pack(">d", 1.0) for _ in range(n))
    data = data[:naxis1].ljust(naxis1, b"\0")
    return h + pad(data)


def put(reader, name, data):
    d = os.path.join(ROOT, reader)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, name), "wb") as f:
        f.write(data if isinstance(data, bytes) else data.encode("utf-8"))


put("fits_image", "naxis1-2e10.fits", image(500, "20000000000"))
put("fits_image", "naxis1-2pow31.fits", image(500, "2147483648"))
put("fits_image", "naxis1-overrun.fits", image(500, "1000") + ext() + b"\0" * 2880)
put("fits_image", "bitpix-larger.fits",
    image(500, "500").replace(card("BITPIX", "-32").encode(), card("BITPIX", "-64").encode(), 1) + ext())
put("fits_image", "cdelt-1e30.fits", image(2000, "2000", "1E30"))
put("fits_table", "repeat-1e10.fits", vector_table(50, "10000000000D", 800))
put("fits_table", "vla-column.fits", vector_table(50, "1PD(50)", 408))
put("fits_table", "complex-column.fits", vector_table(50, "50C", 800))
put("fits_table", "naxis2-2e9.fits",
    vector_table(50, "50D", 800).replace(card("NAXIS2", "1").encode(), card("NAXIS2", "2000000000").encode(), 1))
rows = "".join(f"{5000 + i},1.0,{-0.1 if i % 10 == 3 else 0.1}\n" for i in range(50))
put("text", "negative-sigma.csv", "wave,flux,err\n" + rows)
put("text", "bom.csv", "\ufeffwave,flux,err\n" + rows.replace("-0.1", "0.1"))
put("text", "cr-only.csv", ("wave,flux,err\n" + rows.replace("-0.1", "0.1")).replace("\n", "\r"))
put("catalog", "ra-400.csv", "id,ra,dec,r\na,400,5,20\n")
put("catalog", "dec-minus-95.csv", "id,ra,dec,r\na,10,-95,20\n")
put("catalog", "prob-1.7.csv", "id,ra,dec,r,phot_class,phot_class_prob\na,10,5,20,galaxy,1.7\n")
put("catalog", "header-only.csv", "id,ra,dec,r\n")
put("catalog", "no-radec.csv", "id,r\na,20\n")
put("fit_cache", "non-utf8.jsonl", b'{"v":1,"object_id":"a\xff"}\n')
put("review_log", "torn.jsonl", '{"v":1,"seq":1,"time":"2026-01-01T00:00:00Z","inspector":"ana","object_id":"x","action":"cla')
put("manifest", "tolerance-nan.toml", 'format = 1\nname = "x"\ncreated = "2026-01-01T00:00:00Z"\nzvet_version = "0"\nspectra = []\ntemplates = "builtin"\ntolerance = nan\n')
put("manifest", "format-0.toml", 'format = 0\nname = "x"\ncreated = "2026-01-01T00:00:00Z"\nzvet_version = "0"\nspectra = []\ntemplates = "builtin"\ntolerance = 0.001\n')
