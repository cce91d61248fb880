"""Shared fixtures: the command-line program of the same checkout (the reference every
Python result is compared with, bit for bit) and small inputs made with it and with healpy."""

import os
import pathlib
import subprocess

import numpy as np
import pytest

REPO = pathlib.Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def cli():
    """A function running `planisphere ARGS...` (the binary of this checkout: $PLANISPHERE_BIN,
    or target/release/planisphere, built with `cargo build --release` when missing)."""
    binary = os.environ.get("PLANISPHERE_BIN")
    if binary is None:
        target = pathlib.Path(os.environ.get("CARGO_TARGET_DIR", REPO / "target"))
        binary = target / "release" / "planisphere"
        if not binary.exists():
            subprocess.run(["cargo", "build", "--release", "--bin", "planisphere"],
                           cwd=REPO, check=True)
    binary = str(binary)

    def run(*args, check=True):
        result = subprocess.run([binary, *map(str, args)], capture_output=True, text=True)
        if check and result.returncode != 0:
            raise AssertionError(f"planisphere {' '.join(map(str, args))} failed:\n{result.stderr}")
        return result

    return run


@pytest.fixture(scope="session")
def inputs(tmp_path_factory, cli):
    """An NSIDE 64 lognormal sky (RING, float64) written by `planisphere sky`, a second sky,
    and a binary cap mask with a hole written by healpy (b > 20°, hole of 10° radius)."""
    import healpy as hp

    d = tmp_path_factory.mktemp("inputs")
    nside = 64
    cli("sky", "-o", d / "map.fits", "--nside", nside, "--seed", 11, "--lognormal-shift", 0.02)
    cli("sky", "-o", d / "other.fits", "--nside", nside, "--seed", 12)
    theta, phi = hp.pix2ang(nside, np.arange(hp.nside2npix(nside)))
    lat = 90.0 - np.degrees(theta)
    centre = hp.ang2vec(np.radians(40.0), np.radians(60.0))
    hole = hp.query_disc(nside, centre, np.radians(10.0))
    mask = (lat > 20.0).astype(np.float64)
    mask[hole] = 0.0
    hp.write_map(str(d / "mask.fits"), mask, dtype=np.float64, overwrite=True)
    return {"dir": d, "nside": nside, "map": d / "map.fits", "other": d / "other.fits",
            "mask": d / "mask.fits"}
