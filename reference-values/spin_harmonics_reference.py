"""Reference values for planisphere's spin-weighted harmonic transforms
(src/harmonics/spin_transform.rs).

Run by hand (not by CI) from the repository root, with healpy 1.20.1 and numpy:

    python3 reference-values/spin_harmonics_reference.py

Writes reference-values/spin_harmonics/: a manifest.json and raw little-endian float64 files
(complex arrays as interleaved re, im). To keep the files small, the inputs are formulas that the
Rust test evaluates too (coefficients from l and m, maps from the pixel centres), and only every
`pixel_stride`-th map value and every `alm_stride`-th coefficient (healpy's m-major order) is
stored.

* synthesis: healpy.alm2map_spin([E, B], nside, spin, lmax) of the formula coefficients;
* analysis: healpy.map2alm_spin([Q, U], spin, lmax) of the formula maps (no iterations), and
  with 3 Jacobi iterations a <- a + map2alm_spin(map - alm2map_spin(a)) built from the same two
  healpy functions (stored for the cases with lmax = 2 nside).
"""
import json
import os

import healpy as hp
import numpy as np

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "spin_harmonics")
os.makedirs(OUT, exist_ok=True)


def write(name, array):
    arr = np.asarray(array)
    if np.iscomplexobj(arr):
        arr = np.stack([arr.real, arr.imag], axis=-1)
    arr.astype("<f8").tofile(os.path.join(OUT, name))
    return name


def formula_alm(lmax, shift):
    """E or B coefficients: (cos(0.7 l + 1.3 m + shift) + i sin(0.3 l m + shift)) / (l + 5),
    imaginary part zero for m = 0 (a real field). The Rust test evaluates the same formula."""
    n = hp.Alm.getsize(lmax, lmax)
    l, m = hp.Alm.getlm(lmax, np.arange(n))
    l = l.astype(float)
    m = m.astype(float)
    re = np.cos(0.7 * l + 1.3 * m + shift)
    im = np.where(m == 0, 0.0, np.sin(0.3 * l * m + shift))
    return (re + 1j * im) / (l + 5.0)


def formula_maps(nside):
    """Q and U at the pixel centres (RING): smooth, not band-limited. Same formula in Rust."""
    theta, phi = hp.pix2ang(nside, np.arange(hp.nside2npix(nside)))
    q = np.exp(np.sin(theta) * np.cos(phi)) * np.cos(2.0 * theta) + 0.3 * np.sin(3.0 * phi + 0.4)
    u = np.sin(3.0 * theta) * np.sin(2.0 * phi + 0.3) + 0.2 * np.cos(theta) ** 3
    return q, u


manifest = {"healpy_version": hp.__version__, "numpy_version": np.__version__, "cases": []}

for nside, lmax, spin in [(16, 47, 2), (16, 32, 2), (64, 191, 2), (64, 128, 2), (16, 40, 1), (16, 40, 3)]:
    tag = f"nside{nside}_lmax{lmax}_spin{spin}"
    npix = hp.nside2npix(nside)
    pixel_stride = 3 if nside <= 16 else 17
    alm_stride = 3 if nside <= 16 else 11
    e = formula_alm(lmax, 0.25)
    b = formula_alm(lmax, -1.1)
    q, u = hp.alm2map_spin([e, b], nside, spin, lmax, mmax=lmax)
    qf, uf = formula_maps(nside)
    a0 = hp.map2alm_spin([qf, uf], spin, lmax=lmax, mmax=lmax)
    a3 = [x.copy() for x in a0]
    for _ in range(3):
        rq, ru = hp.alm2map_spin(a3, nside, spin, lmax, mmax=lmax)
        c = hp.map2alm_spin([qf - rq, uf - ru], spin, lmax=lmax, mmax=lmax)
        a3 = [a3[0] + c[0], a3[1] + c[1]]
    pix = slice(0, npix, pixel_stride)
    idx = slice(0, len(e), alm_stride)
    manifest["cases"].append(
        {
            "nside": nside,
            "lmax": lmax,
            "spin": spin,
            "pixel_stride": pixel_stride,
            "alm_stride": alm_stride,
            "synthesis_q": write(f"synthesis_q_{tag}.f64", q[pix]),
            "synthesis_u": write(f"synthesis_u_{tag}.f64", u[pix]),
            "synthesis_rms": float(np.sqrt(np.mean(q**2 + u**2) / 2.0)),
            "analysis_e": write(f"analysis_e_{tag}.f64", a0[0][idx]),
            "analysis_b": write(f"analysis_b_{tag}.f64", a0[1][idx]),
        }
    )
    if lmax == 2 * nside:
        manifest["cases"][-1]["analysis_iter3_e"] = write(f"analysis_iter3_e_{tag}.f64", a3[0][idx])
        manifest["cases"][-1]["analysis_iter3_b"] = write(f"analysis_iter3_b_{tag}.f64", a3[1][idx])

with open(os.path.join(OUT, "manifest.json"), "w") as f:
    json.dump(manifest, f, indent=1)
print("wrote", OUT)
