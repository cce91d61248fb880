#!/usr/bin/env python3
"""HEALPix FITS fixtures written by healpy 1.20.1, and healpy's reading of planisphere's files.

Run by hand (not by CI):  python3 reference-values/fits_reference.py

1. Writes small HEALPix FITS files with healpy 1.20.1 (healpy.write_map) into
   reference-values/fits/, plus two header variants edited with astropy 8.0.2 (ORDERING removed;
   an NPIX keyword that disagrees with NSIDE), and fits/expected.json with, for each file and
   column, the values healpy.read_map(..., nest=None) returns (bad pixels as null).
2. If reference-values/fits/written_by_planisphere/ holds files (made by
   `cargo run --release --example write_fits_for_healpy`), reads each with healpy.read_map and
   compares with the healpy fixture it was made from; the verdict goes to
   fits/healpy_reads_planisphere.json.

Bad pixels: healpy.mask_bad (|m - UNSEEN| <= 1e-8 + 1e-5 |UNSEEN|) or non-finite (NaN, inf).
"""
import json
import os
import warnings

import numpy as np
import healpy as hp
from astropy.io import fits as pf
import astropy

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "fits")
BY_US = os.path.join(OUT, "written_by_planisphere")


def values_for_json(m):
    """healpy's map as a JSON list: repr(float(x)) for good pixels (float32 widened exactly), None
    for bad. Values are strings (Python's shortest round-trip repr) so that any JSON reader can
    recover the exact float64 by a correctly rounded decimal parse.

    healpy.mask_bad flags UNSEEN only; NaN is kept as NaN by healpy.read_map, and counts as bad
    here too (it cannot be a pixel value)."""
    m = np.asarray(m)
    bad = hp.mask_bad(m) | ~np.isfinite(m)
    return [None if b else repr(float(x)) for x, b in zip(m, bad)]


def read_all(path):
    """All value columns as healpy.read_map returns them, in file order, with their names."""
    with pf.open(path) as hdul:
        hdr = hdul[1].header
        names = [c.name for c in hdul[1].columns]
    partial = str(hdr.get("OBJECT", "")).strip() == "PARTIAL" or str(hdr.get("INDXSCHM", "")).strip() == "EXPLICIT"
    if partial:
        names = names[1:]
    maps = []
    for i in range(len(names)):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            maps.append(hp.read_map(path, field=i, nest=None, dtype=None))
    return names, maps, hdr


def make_fixtures():
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(20240611)
    made = []  # (file name, description)

    def path(name):
        return os.path.join(OUT, name)

    # Full sky RING float64, NSIDE 8 (768 pixels < 1024: one value per row).
    m = rng.normal(0.0, 1.0, hp.nside2npix(8))
    hp.write_map(path("ring_nside8_float64.fits"), m, nest=False, dtype=np.float64, overwrite=True, column_names=["TEMPERATURE"])
    made.append(("ring_nside8_float64.fits", "full sky, RING, NSIDE 8, float64, one value per row"))

    # Full sky NESTED float32, NSIDE 16 (3072 pixels: rows of 1024), with COORDSYS.
    m = rng.normal(0.0, 0.02, hp.nside2npix(16))
    hp.write_map(path("nested_nside16_float32.fits"), m, nest=True, dtype=np.float32, overwrite=True, column_names=["KAPPA"], coord="G")
    made.append(("nested_nside16_float32.fits", "full sky, NESTED, NSIDE 16, float32, rows of 1024, COORDSYS G"))

    # Full sky RING float64, NSIDE 16, rows of 1024.
    m = rng.normal(5.0, 2.0, hp.nside2npix(16))
    hp.write_map(path("ring_nside16_float64.fits"), m, nest=False, dtype=np.float64, overwrite=True)
    made.append(("ring_nside16_float64.fits", "full sky, RING, NSIDE 16, float64, rows of 1024, default column name"))

    # Partial sky: pixels with theta < 60 deg, RING, NSIDE 16 (healpy picks a 16-bit PIXEL column).
    m = rng.normal(0.0, 1.0, hp.nside2npix(16))
    theta, _ = hp.pix2ang(16, np.arange(hp.nside2npix(16)))
    m[theta > np.radians(60)] = hp.UNSEEN
    hp.write_map(path("partial_nside16_ring.fits"), m, nest=False, partial=True, dtype=np.float64, overwrite=True, column_names=["SIGNAL"])
    made.append(("partial_nside16_ring.fits", "partial sky (theta < 60 deg), RING, NSIDE 16, PIXEL int16 + float64"))

    # UNSEEN and NaN pixels, float32, NSIDE 8, NESTED.
    m = rng.normal(0.0, 1.0, hp.nside2npix(8))
    m[[0, 5, 100, 767]] = hp.UNSEEN
    m[[7, 300]] = np.nan
    hp.write_map(path("bad_pixels_nside8_float32.fits"), m, nest=True, dtype=np.float32, overwrite=True, column_names=["VALUE"])
    made.append(("bad_pixels_nside8_float32.fits", "NESTED NSIDE 8 float32 with UNSEEN at 0,5,100,767 and NaN at 7,300"))

    # Three columns I, Q, U (healpy's default names for three maps), RING NSIDE 8, float32.
    iqu = [rng.normal(0.0, s, hp.nside2npix(8)) for s in (1.0, 0.1, 0.1)]
    hp.write_map(path("iqu_nside8_float32.fits"), iqu, nest=False, dtype=np.float32, overwrite=True)
    made.append(("iqu_nside8_float32.fits", "three columns (healpy default I/Q/U names), RING NSIDE 8, float32"))

    # Integer (uint8) mask, RING NSIDE 16, rows of 1024: 1 for |latitude| > 20 deg.
    mask = (np.abs(np.pi / 2 - theta) > np.radians(20)).astype(np.uint8)
    hp.write_map(path("mask_nside16_uint8.fits"), mask, nest=False, dtype=np.uint8, overwrite=True, column_names=["MASK"])
    made.append(("mask_nside16_uint8.fits", "uint8 mask (TFORM 1024B), RING NSIDE 16, |b| > 20 deg"))

    # int32 weights column, NSIDE 8, one value per row.
    w = (np.arange(hp.nside2npix(8)) % 2).astype(np.int32)
    hp.write_map(path("mask_nside8_int32.fits"), w, nest=False, dtype=np.int32, overwrite=True, column_names=["WEIGHT"])
    made.append(("mask_nside8_int32.fits", "int32 0/1 column, RING NSIDE 8"))

    # Header variants found in the wild, edited with astropy: no ORDERING; NPIX disagreeing with NSIDE.
    with pf.open(path("ring_nside8_float64.fits")) as hdul:
        del hdul[1].header["ORDERING"]
        hdul.writeto(path("no_ordering_nside8.fits"), overwrite=True)
    made.append(("no_ordering_nside8.fits", "ring_nside8_float64.fits without the ORDERING keyword (healpy assumes RING)"))
    with pf.open(path("ring_nside8_float64.fits")) as hdul:
        hdul[1].header["NPIX"] = (700, "deliberately wrong")
        hdul.writeto(path("npix_disagrees_nside8.fits"), overwrite=True)
    made.append(("npix_disagrees_nside8.fits", "ring_nside8_float64.fits with NPIX = 700 (NSIDE is trusted)"))

    expected = {
        "source": f"healpy {hp.__version__} write_map/read_map, astropy {astropy.__version__} for header edits",
        "bad_pixel_rule": "healpy.mask_bad (|m - UNSEEN| <= 1e-8 + 1e-5 |UNSEEN|) or non-finite; bad pixels are null",
        "files": {},
    }
    for name, desc in made:
        names, maps, hdr = read_all(path(name))
        nside = int(hdr["NSIDE"])
        expected["files"][name] = {
            "description": desc,
            "nside": nside,
            "ordering": str(hdr.get("ORDERING", "RING")).strip(),
            "coordsys": (str(hdr["COORDSYS"]).strip() if "COORDSYS" in hdr else None),
            "partial": str(hdr.get("OBJECT", "")).strip() == "PARTIAL",
            "columns": names,
            "tforms": [],
            "values": {n: values_for_json(m) for n, m in zip(names, maps)},
        }
        with pf.open(path(name)) as hdul:
            expected["files"][name]["tforms"] = [c.format for c in hdul[1].columns]
    with open(os.path.join(OUT, "expected.json"), "w") as f:
        json.dump(expected, f)
    total = sum(os.path.getsize(path(n)) for n, _ in made)
    print(f"wrote {len(made)} fixture files ({total} bytes) and expected.json")


def check_planisphere_files():
    """healpy.read_map on each file planisphere wrote, compared with the fixture it came from."""
    manifest_path = os.path.join(BY_US, "manifest.json")
    if not os.path.exists(manifest_path):
        print("no written_by_planisphere/manifest.json yet: run the Rust example first")
        return
    with open(manifest_path) as f:
        manifest = json.load(f)
    results = []
    for entry in manifest["files"]:
        ours = os.path.join(BY_US, entry["file"])
        source = os.path.join(OUT, entry["source"])
        with pf.open(ours) as hdul:
            hdr = hdul[1].header
            header = {k: (str(hdr[k]).strip() if k in hdr else None) for k in ("PIXTYPE", "ORDERING", "NSIDE", "INDXSCHM", "OBJECT", "COORDSYS", "FIRSTPIX", "LASTPIX")}
            tforms = [c.format for c in hdul[1].columns]
        ok = True
        max_diff = 0.0
        detail = []
        src_names, src_maps, src_hdr = read_all(source)
        for k, col in enumerate(entry["columns"]):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                got = hp.read_map(ours, field=k, nest=(entry["ordering"] == "NESTED"), dtype=np.float64)
                want = hp.read_map(source, field=entry["source_columns"][k], nest=(entry["ordering"] == "NESTED"), dtype=np.float64)
            if entry.get("float32", False):
                want = want.astype(np.float32).astype(np.float64)
            bad_got = hp.mask_bad(got) | ~np.isfinite(got)
            bad_want = hp.mask_bad(want) | ~np.isfinite(want)
            same_bad = bool(np.array_equal(bad_got, bad_want))
            good = ~bad_want
            same_values = bool(np.array_equal(got[good], want[good]))
            diff = float(np.max(np.abs(got[good] - want[good]))) if good.any() and same_bad else float("nan")
            max_diff = max(max_diff, diff) if diff == diff else diff
            ok = ok and same_bad and same_values
            detail.append({"column": col, "same_bad_pixels": same_bad, "identical_values": same_values, "bad_pixels": int(bad_got.sum())})
        results.append({
            "file": entry["file"],
            "source": entry["source"],
            "healpy_read_map": f"healpy {hp.__version__}",
            "header": header,
            "tforms": tforms,
            "columns": detail,
            "max_abs_difference": max_diff,
            "identical": ok,
        })
    out = {"reader": f"healpy {hp.__version__} read_map", "all_identical": all(r["identical"] for r in results), "files": results}
    with open(os.path.join(OUT, "healpy_reads_planisphere.json"), "w") as f:
        json.dump(out, f, indent=1)
    print(f"healpy read {len(results)} planisphere files; all identical: {out['all_identical']}")


if __name__ == "__main__":
    make_fixtures()
    check_planisphere_files()
