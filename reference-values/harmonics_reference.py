"""Reference values for planisphere's spherical harmonic transforms (src/harmonics/).

Run by hand (not by CI) from the repository root:

    python3 reference-values/harmonics_reference.py

Writes reference-values/harmonics/: a manifest.json and raw little-endian float64 files
(complex arrays as interleaved re, im). Sources: healpy 1.20.1 (alm2map, map2alm with
use_weights=False, alm2cl, pix2ang) and scipy 1.17.1 (scipy.special.sph_harm_y, which includes
the Condon-Shortley phase, as healpy's Y_lm does).
"""
import json
import os

import healpy as hp
import numpy as np
import scipy
import scipy.special as sp

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "harmonics")
os.makedirs(OUT, exist_ok=True)


def write(name, array):
    arr = np.asarray(array)
    if np.iscomplexobj(arr):
        arr = np.stack([arr.real, arr.imag], axis=-1)
    arr.astype("<f8").tofile(os.path.join(OUT, name))
    return name


manifest = {
    "healpy_version": hp.__version__,
    "numpy_version": np.__version__,
    "scipy_version": scipy.__version__,
    "transform_cases": [],
    "geometry_cases": [],
    "single_harmonic_cases": [],
}

# --- Random coefficients, healpy synthesis and analysis -------------------------------------
for case_index, (nside, lmax) in enumerate([(4, 11), (12, 35), (16, 47), (32, 64), (64, 128)]):
    rng = np.random.default_rng(20260 + case_index)
    ell = np.arange(lmax + 1)
    cl = 1.0 / (ell + 10.0) ** 2  # smooth red spectrum
    # Draw directly so the seed fully fixes the values: a_l0 real, m > 0 complex.
    nalm = hp.Alm.getsize(lmax, lmax)
    alm = (rng.standard_normal(nalm) + 1j * rng.standard_normal(nalm)) / np.sqrt(2.0)
    l_of, m_of = hp.Alm.getlm(lmax, np.arange(nalm))
    alm *= np.sqrt(cl[l_of])
    alm[m_of == 0] = alm[m_of == 0].real * np.sqrt(2.0)
    m_map = hp.alm2map(alm, nside, lmax=lmax, mmax=lmax)
    a_iter0 = hp.map2alm(m_map, lmax=lmax, mmax=lmax, iter=0, use_weights=False)
    a_iter3 = hp.map2alm(m_map, lmax=lmax, mmax=lmax, iter=3, use_weights=False)
    scale = np.max(np.abs(alm))
    tag = f"nside{nside}_lmax{lmax}"
    manifest["transform_cases"].append(
        {
            "nside": nside,
            "lmax": lmax,
            "alm": write(f"alm_{tag}.f64", alm),
            "map": write(f"map_{tag}.f64", m_map),
            "analysis_iter0": write(f"analysis_iter0_{tag}.f64", a_iter0),
            "analysis_iter3": write(f"analysis_iter3_{tag}.f64", a_iter3),
            "cl": write(f"cl_{tag}.f64", hp.alm2cl(alm)),
            "cross_cl_input_iter0": write(f"crosscl_{tag}.f64", hp.alm2cl(alm, a_iter0)),
            "healpy_roundtrip_error_iter0": float(np.max(np.abs(a_iter0 - alm)) / scale),
            "healpy_roundtrip_error_iter3": float(np.max(np.abs(a_iter3 - alm)) / scale),
        }
    )

# --- High lmax (polar rings, large m, aliasing on small rings): Nside 256, lmax 767 ----------
# Coefficients from a closed formula (also evaluated by the Rust test) so that only a subset of
# map values and coefficients needs to be stored.
nside, lmax = 256, 767
nalm = hp.Alm.getsize(lmax, lmax)
l_of, m_of = hp.Alm.getlm(lmax, np.arange(nalm))
lf, mf = l_of.astype(float), m_of.astype(float)
alm = (np.cos(0.1 * lf + 0.37 * mf + 0.013 * lf * mf) + 1j * np.sin(0.23 * lf - 0.11 * mf)) / (lf + 1.0)
alm[m_of == 0] = alm[m_of == 0].real
m_map = hp.alm2map(alm, nside, lmax=lmax, mmax=lmax)
a_iter0 = hp.map2alm(m_map, lmax=lmax, mmax=lmax, iter=0, use_weights=False)
npix = 12 * nside * nside
edge = 2 * 4 * 5  # pixels of the first (and last) four rings: 4 + 8 + 12 + 16
pix = np.unique(np.concatenate([np.arange(edge), np.arange(npix - edge, npix), np.arange(0, npix, 97)]))
sel_m = np.isin(m_of, [0, 1, 100, 383, 600, 700, 760, 767])
idx = np.unique(np.concatenate([np.nonzero(sel_m)[0], np.arange(0, nalm, 53)]))
manifest["formula_case"] = {
    "nside": nside,
    "lmax": lmax,
    "formula": "(cos(0.1 l + 0.37 m + 0.013 l m) + i sin(0.23 l - 0.11 m)) / (l + 1), imaginary part 0 for m = 0",
    "pixels": write("formula_pixels.f64", pix.astype(float)),
    "map_values": write("formula_map_values.f64", m_map[pix]),
    "alm_indices": write("formula_alm_indices.f64", idx.astype(float)),
    "analysis_iter0_values": write("formula_analysis_iter0_values.f64", a_iter0[idx]),
    "map_max_abs": float(np.max(np.abs(m_map))),
    "analysis_max_abs": float(np.max(np.abs(a_iter0))),
}

# --- Ring geometry: healpy pix2ang at the first pixel of every ring -------------------------
for nside in (1, 3, 4, 12, 16, 64):
    npix = 12 * nside * nside
    theta, phi = hp.pix2ang(nside, np.arange(npix))
    # Ring starts are where theta changes.
    starts = np.concatenate([[0], np.nonzero(np.diff(theta) != 0)[0] + 1])
    counts = np.diff(np.concatenate([starts, [npix]]))
    manifest["geometry_cases"].append(
        {
            "nside": nside,
            "first_pixel": starts.tolist(),
            "pixel_count": counts.tolist(),
            "cos_theta": np.cos(theta[starts]).tolist(),
            "phi0": phi[starts].tolist(),
        }
    )

# --- Single harmonics: 2 Re(a Y_lm) (m > 0) or a Y_l0 at healpy's pixel centres -------------
nside, lmax = 16, 47
theta, phi = hp.pix2ang(nside, np.arange(12 * nside * nside))
for l, m, a in [(0, 0, 1.0), (1, 0, 1.0), (1, 1, 1.0), (2, 1, 0.3 - 0.7j), (5, 3, 1j),
                (20, 17, 0.5 + 0.5j), (47, 0, 1.0), (47, 46, 1.0 - 2.0j), (47, 47, 1.0)]:
    y = sp.sph_harm_y(l, m, theta, phi)
    values = (a * y).real if m == 0 else 2.0 * (a * y).real
    manifest["single_harmonic_cases"].append(
        {
            "nside": nside,
            "lmax": lmax,
            "l": l,
            "m": m,
            "re": float(np.real(a)),
            "im": float(np.imag(a)),
            "map": write(f"single_l{l}_m{m}.f64", values),
        }
    )

with open(os.path.join(OUT, "manifest.json"), "w") as f:
    json.dump(manifest, f, indent=1)
print("wrote", OUT, "healpy", hp.__version__, "scipy", scipy.__version__)
