"""Reference summaries of large harmonic transforms, for tests/harmonics_large_against_healpy.rs.

Run by hand (not by CI) from the repository root, in a virtual environment with the two
reference libraries (about two minutes at NSIDE 2048 on one core):

    python3 -m venv /work/venv-ref
    /work/venv-ref/bin/pip install healpy==1.20.1 ducc0==0.42.0 numpy
    /work/venv-ref/bin/python reference-values/harmonics_large_reference.py

For NSIDE 256 (the test run in CI) and 2048 (the ignored test), lmax = 3 NSIDE - 1, the
coefficients are a formula of (l, m) (below; integer arithmetic then two IEEE divisions, so the
Rust test builds the same bits). Written to reference-values/harmonics_large/ as a manifest.json
only (small summaries, no maps):

* healpy 1.20.1: alm2map (map values at a few pixels, and the map's sum of squares),
  map2alm(use_weights=False) with iter=0 and iter=3 (a few coefficients, the sum of squared
  differences from the input: the round trip error), alm2cl of both;
* ducc0 0.42.0: sht.experimental.synthesis of the same coefficients (the same pixels) and
  adjoint_synthesis times 4 pi / Npix (healpy's iter=0 quadrature), as a second reference;
  the largest differences between the two libraries are written too.
"""
import json
import os

import ducc0
import healpy as hp
import numpy as np

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "harmonics_large")
os.makedirs(OUT, exist_ok=True)


def formula_alm(lmax):
    """a_lm = ((7l + 13m) mod 101 - 50)/50/(l + 1) + i((11l + 5m) mod 97 - 48)/48/(l + 1),
    imaginary part 0 at m = 0; healpy's m-major layout."""
    m_all, l_all = [], []
    for m in range(lmax + 1):
        for l in range(m, lmax + 1):
            m_all.append(m)
            l_all.append(l)
    l = np.array(l_all, dtype=np.int64)
    m = np.array(m_all, dtype=np.int64)
    re = (((7 * l + 13 * m) % 101 - 50).astype(np.float64) / 50.0) / (l + 1).astype(np.float64)
    im = (((11 * l + 5 * m) % 97 - 48).astype(np.float64) / 48.0) / (l + 1).astype(np.float64)
    im[m == 0] = 0.0
    return re + 1j * im, l, m


def ring_geometry(nside):
    """Ring colatitudes, pixel counts, first pixels and azimuths of the RING scheme, from
    healpy's own pix2ang at each ring's first pixel."""
    rings = 4 * nside - 1
    first = np.empty(rings, dtype=np.uint64)
    nphi = np.empty(rings, dtype=np.uint64)
    start = 0
    for i in range(1, rings + 1):
        i_n = i if i <= 2 * nside else 4 * nside - i
        n = 4 * i_n if i_n < nside else 4 * nside
        first[i - 1] = start
        nphi[i - 1] = n
        start += n
    theta, phi0 = hp.pix2ang(nside, first.astype(np.int64))
    return theta, nphi, phi0, first


def coefficient_picks(lmax):
    """(l, m) pairs reported: low, middle and high multipoles, sectoral and zonal."""
    picks = [(0, 0), (1, 0), (1, 1), (2, 1), (10, 3), (lmax // 3, lmax // 7),
             (lmax // 2, 0), (lmax // 2, lmax // 2), (lmax - 1, lmax // 3),
             (lmax, 0), (lmax, lmax // 2), (lmax, lmax)]
    return picks


def pixel_picks(nside):
    npix = 12 * nside * nside
    return sorted({0, 1, 5, 4 * nside, 2 * nside * (nside - 1) + 3, npix // 3 + 7,
                   npix // 2, npix // 2 + 2 * nside + 1, 2 * npix // 3 + 11, npix - 6 * nside,
                   npix - 2, npix - 1})


def index(lmax, l, m):
    return m * (2 * lmax + 1 - m) // 2 + l


def complex_list(values):
    return [[float(v.real), float(v.imag)] for v in values]


def case(nside):
    lmax = 3 * nside - 1
    npix = 12 * nside * nside
    alm, _, _ = formula_alm(lmax)
    hmap = hp.alm2map(alm, nside, lmax=lmax, mmax=lmax)
    a0 = hp.map2alm(hmap, lmax=lmax, mmax=lmax, iter=0, use_weights=False)
    a3 = hp.map2alm(hmap, lmax=lmax, mmax=lmax, iter=3, use_weights=False)
    cl_in = hp.alm2cl(alm)
    cl0 = hp.alm2cl(a0)
    cl3 = hp.alm2cl(a3)

    theta, nphi, phi0, first = ring_geometry(nside)
    geom = dict(theta=theta, nphi=nphi, phi0=phi0, ringstart=first, spin=0,
                lmax=lmax, mmax=lmax, nthreads=0)
    dmap = ducc0.sht.experimental.synthesis(alm=alm.reshape(1, -1), **geom)[0]
    d0 = ducc0.sht.experimental.adjoint_synthesis(
        map=hmap.reshape(1, -1), **geom)[0] * (4.0 * np.pi / npix)

    picks = coefficient_picks(lmax)
    idx = [index(lmax, l, m) for l, m in picks]
    pix = pixel_picks(nside)
    m_weight = np.where(np.arange(len(alm)) <= lmax, 1.0, 2.0)  # m > 0 counted twice
    ell_picks = sorted({0, 1, 2, 3, 10, lmax // 4, lmax // 2, 3 * lmax // 4, lmax - 1, lmax})
    return {
        "nside": nside,
        "lmax": lmax,
        "map_max_abs": float(np.max(np.abs(hmap))),
        "map_sum_squares": float(np.sum(hmap ** 2)),
        "pixels": pix,
        "map_at_pixels": [float(hmap[p]) for p in pix],
        "ducc0_map_at_pixels": [float(dmap[p]) for p in pix],
        "ducc0_healpy_map_max_difference": float(np.max(np.abs(dmap - hmap))),
        "alm_max_abs": float(np.max(np.abs(alm))),
        "coefficients": [list(p) for p in picks],
        "analysis_iter0_at": complex_list(a0[idx]),
        "analysis_iter3_at": complex_list(a3[idx]),
        "ducc0_analysis_iter0_at": complex_list(d0[idx]),
        "ducc0_healpy_iter0_max_difference": float(np.max(np.abs(d0 - a0))),
        "round_trip_iter0_sum_squares": float(np.sum(m_weight * np.abs(a0 - alm) ** 2)),
        "round_trip_iter3_sum_squares": float(np.sum(m_weight * np.abs(a3 - alm) ** 2)),
        "ells": ell_picks,
        "cl_input_at": [float(cl_in[l]) for l in ell_picks],
        "cl_iter0_at": [float(cl0[l]) for l in ell_picks],
        "cl_iter3_at": [float(cl3[l]) for l in ell_picks],
        "cl_iter0_sum": float(np.sum(cl0)),
        "cl_iter3_sum": float(np.sum(cl3)),
    }


def main():
    manifest = {
        "healpy_version": hp.__version__,
        "ducc0_version": ducc0.__version__,
        "numpy_version": np.__version__,
        "cases": [case(256), case(2048)],
    }
    with open(os.path.join(OUT, "manifest.json"), "w") as f:
        json.dump(manifest, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
