#!/usr/bin/env python3
"""Reference values for planisphere's HEALPix geometry tests, computed with healpy.

Run by hand (not by CI):  python3 reference-values/healpix_reference.py
Writes reference-values/healpix/*.bin (little-endian arrays) and healpix/manifest.json.

Directions come from a SplitMix64 stream (Steele, Lea & Flood 2014) that the Rust tests
regenerate bit for bit, so only healpy's answers need to be stored:
    u = (next() >> 11) * 2**-53,  v likewise,  theta = arccos(1 - 2u),  phi = 2*pi*v.
"""
import json
import os
import numpy as np
import healpy as hp

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "healpix")
MASK = (1 << 64) - 1


def splitmix64(seed, count):
    out = np.empty(count, dtype=np.uint64)
    state = seed & MASK
    for i in range(count):
        state = (state + 0x9E3779B97F4A7C15) & MASK
        z = state
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & MASK
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & MASK
        out[i] = z ^ (z >> 31)
    return out


def directions(seed, count):
    r = splitmix64(seed, 2 * count)
    u = (r[0::2] >> np.uint64(11)).astype(np.float64) * 2.0**-53
    v = (r[1::2] >> np.uint64(11)).astype(np.float64) * 2.0**-53
    return np.arccos(1.0 - 2.0 * u), 2.0 * np.pi * v


def main():
    os.makedirs(OUT, exist_ok=True)
    cases = []
    n_dir = 100_000
    for nside, nested_ok in [(1, True), (16, True), (1024, True), (8192, True), (5, False)]:
        seed = 1000 + nside
        theta, phi = directions(seed, n_dir)
        ring = hp.ang2pix(nside, theta, phi, nest=False).astype("<u4")
        case = {"nside": nside, "seed": seed, "directions": n_dir,
                "ang2pix_ring": f"ang2pix_ring_{nside}.bin"}
        ring.tofile(os.path.join(OUT, case["ang2pix_ring"]))
        # pixel centres of pseudo-random pixels (RING), and RING<->NESTED
        npix = 12 * nside * nside
        pix = (splitmix64(seed + 1, 2000) % np.uint64(npix)).astype(np.int64)
        th, ph = hp.pix2ang(nside, pix, nest=False)
        np.stack([th, ph], axis=1).astype("<f8").tofile(os.path.join(OUT, f"pix2ang_ring_{nside}.bin"))
        case["pix2ang_ring"] = f"pix2ang_ring_{nside}.bin"
        case["pixels"] = 2000
        if nested_ok:
            nest = hp.ang2pix(nside, theta, phi, nest=True).astype("<u4")
            nest.tofile(os.path.join(OUT, f"ang2pix_nest_{nside}.bin"))
            case["ang2pix_nest"] = f"ang2pix_nest_{nside}.bin"
            th, ph = hp.pix2ang(nside, pix, nest=True)
            np.stack([th, ph], axis=1).astype("<f8").tofile(os.path.join(OUT, f"pix2ang_nest_{nside}.bin"))
            case["pix2ang_nest"] = f"pix2ang_nest_{nside}.bin"
            hp.ring2nest(nside, pix).astype("<u4").tofile(os.path.join(OUT, f"ring2nest_{nside}.bin"))
            case["ring2nest"] = f"ring2nest_{nside}.bin"
            hp.nest2ring(nside, pix).astype("<u4").tofile(os.path.join(OUT, f"nest2ring_{nside}.bin"))
            case["nest2ring"] = f"nest2ring_{nside}.bin"
            # neighbours (SW, W, NW, N, NE, E, SE, S; -1 where absent), RING and NESTED
            for scheme, nest_flag in [("ring", False), ("nest", True)]:
                nb = hp.get_all_neighbours(nside, pix, nest=nest_flag).T.astype("<i8")
                nb.tofile(os.path.join(OUT, f"neighbours_{scheme}_{nside}.bin"))
                case[f"neighbours_{scheme}"] = f"neighbours_{scheme}_{nside}.bin"
        cases.append(case)
    manifest = {"healpy_version": hp.__version__, "numpy_version": np.__version__,
                "cases": cases}
    with open(os.path.join(OUT, "manifest.json"), "w") as f:
        json.dump(manifest, f, indent=1)
    print("wrote", OUT, "healpy", hp.__version__)


if __name__ == "__main__":
    main()
