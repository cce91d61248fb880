"""Reference values for planisphere's MASTER deconvolution (src/harmonics/mode_coupling.rs, src/harmonics/wigner.rs).

Run by hand (not by CI) from the repository root:

    python3 reference-values/master_reference.py

An independent implementation of the binned MASTER estimator (Hivon et al. 2002, ApJ 567, 2):
the pseudo-spectra of the weighted map and of the weight map from healpy 1.20.1 `anafast`
(iter=0), the squared 3j symbols (l1 l2 l3; 0 0 0)^2 from their exact closed form in rational
arithmetic (Python integers; checked here against sympy's `wigner_3j`), the coupling matrix of
eq. A31, the binned kernel of eq. 20 and a numpy solve. Also: 3j values from sympy's
`wigner_3j` at small and large l, and the HEALPix pixel window: at NSIDE 4 and 8 from its
definition (pixel means of scipy's Y_lm over sub-pixel centres, Richardson-extrapolated), and
healpy's own `pixwin` tables at NSIDE 4, 8, 64 and 256. healpy 1.20.1 downloads those tables at
run time; when that fails the script reads them from the healpy 1.14.0 wheel, which still ships
them (healpy/data/pixel_window_nXXXX.fits), given as the first argument:

    pip download healpy==1.14.0 --no-deps --only-binary :all: --python-version 3.8 \
        --platform manylinux1_x86_64 -d /tmp/healpy-tables
    python3 reference-values/master_reference.py /tmp/healpy-tables/healpy-1.14.0-cp38-cp38-manylinux1_x86_64.whl

Writes reference-values/master/: manifest.json and .npy arrays (float64).
"""
import json
import os
import sys
import tempfile
import zipfile
from fractions import Fraction

import healpy as hp
import numpy as np
import scipy
import scipy.special as sp
import sympy
from sympy.physics.wigner import wigner_3j

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "master")
os.makedirs(OUT, exist_ok=True)


def save(name, array):
    np.save(os.path.join(OUT, name), np.asarray(array, dtype="<f8"))
    return name


# --- squared 3j symbols with m = 0, exact ---------------------------------------------------
FACT = [1]
for k in range(1, 2000):
    FACT.append(FACT[-1] * k)


def w3j_squared(l1, l2, l3):
    """(l1 l2 l3; 0 0 0)^2 = (J-2l1)!(J-2l2)!(J-2l3)!/(J+1)! * [g!/((g-l1)!(g-l2)!(g-l3)!)]^2,
    J = l1+l2+l3 even, g = J/2 (Edmonds 1957, Angular Momentum in Quantum Mechanics, §3.7);
    zero for odd J or outside the triangle."""
    J = l1 + l2 + l3
    if J % 2 or l3 < abs(l1 - l2) or l3 > l1 + l2:
        return 0.0
    g = J // 2
    num = FACT[J - 2 * l1] * FACT[J - 2 * l2] * FACT[J - 2 * l3]
    comb = FACT[g] // (FACT[g - l1] * FACT[g - l2] * FACT[g - l3])
    return float(Fraction(num * comb * comb, FACT[J + 1]))


# the closed form against sympy on a few triples
for t in [(2, 2, 2), (3, 5, 4), (10, 7, 5), (40, 31, 25), (60, 60, 0)]:
    s = float(wigner_3j(*t, 0, 0, 0)) ** 2
    assert abs(w3j_squared(*t) - s) <= 1e-15 * max(s, 1e-300), t

manifest = {
    "healpy_version": hp.__version__,
    "numpy_version": np.__version__,
    "scipy_version": scipy.__version__,
    "sympy_version": sympy.__version__,
    "cases": [],
}

# --- a fixed sky, a mask with a cut and holes ----------------------------------------------
NSIDE = 32
npix = hp.nside2npix(NSIDE)
theta, phi = hp.pix2ang(NSIDE, np.arange(npix))
vec = np.array(hp.pix2vec(NSIDE, np.arange(npix))).T
lat = 90.0 - np.degrees(theta)


def c2(x):
    """(1 - cos(pi x))/2 on [0, 1], 0 below, 1 above."""
    x = np.clip(x, 0.0, 1.0)
    return 0.5 * (1.0 - np.cos(np.pi * x))


# latitude cut |b| < 12 deg with a 6 deg taper, five holes of 4-8 deg with 3 deg tapers
weights = c2((np.abs(lat) - 12.0) / 6.0)
holes = [(40.0, 45.0, 6.0), (150.0, 30.0, 4.0), (250.0, -40.0, 8.0), (320.0, -60.0, 5.0),
         (100.0, -25.0, 4.0)]
for lon, la, radius in holes:
    c = hp.ang2vec(lon, la, lonlat=True)
    dist = np.degrees(np.arccos(np.clip(vec @ c, -1.0, 1.0)))
    weights *= c2((dist - radius) / 3.0)
ell_sky = np.arange(3 * NSIDE)
cl_sky = 1.0 / (ell_sky + 8.0) ** 2
cl_sky[:2] = 0.0
np.random.seed(2002)  # healpy's synalm draws from numpy's global generator
alm = hp.synalm(cl_sky, lmax=3 * NSIDE - 1, new=True)
sky = hp.alm2map(alm, NSIDE, lmax=3 * NSIDE - 1)
save("sky_nside32.npy", sky)
save("weights_nside32.npy", weights)


def pseudo_spectrum(m, w, lmax):
    """Spectrum of w (m - mean_w(m)) by healpy anafast, iter=0 (Hivon et al. 2002 eq. 2)."""
    mean = np.sum(w * m) / np.sum(w)
    return hp.anafast((m - mean) * w, lmax=lmax, iter=0)


def coupling(wl, lmax):
    """M_l1l2 = (2l2+1)/(4pi) sum_l3 (2l3+1) W_l3 (l1 l2 l3; 0 0 0)^2 (Hivon et al. 2002 A31),
    W_l3 = 0 beyond len(wl) - 1."""
    lw = len(wl) - 1
    M = np.zeros((lmax + 1, lmax + 1))
    for l1 in range(lmax + 1):
        for l2 in range(l1, lmax + 1):
            s = 0.0
            for l3 in range(abs(l1 - l2), min(l1 + l2, lw) + 1):
                s += (2 * l3 + 1) * wl[l3] * w3j_squared(l1, l2, l3)
            M[l1, l2] = s / (4 * np.pi)
            M[l2, l1] = s / (4 * np.pi)
    return M * (2 * np.arange(lmax + 1) + 1)[None, :]


def binning(lmax, width, weighting):
    """P (nb x lmax+1) and Q (lmax+1 x nb), bins of `width` from l = 2 (Hivon et al. eq. 20)."""
    edges = []
    lo = 2
    while lo <= lmax:
        hi = min(lo + width - 1, lmax)
        edges.append((lo, hi))
        lo = hi + 1
    P = np.zeros((len(edges), lmax + 1))
    Q = np.zeros((lmax + 1, len(edges)))
    for b, (lo, hi) in enumerate(edges):
        ell = np.arange(lo, hi + 1)
        n = hi - lo + 1
        if weighting == "cl":
            P[b, lo:hi + 1] = 1.0 / n
            Q[lo:hi + 1, b] = 1.0
        else:
            P[b, lo:hi + 1] = ell * (ell + 1) / (2 * np.pi) / n
            Q[lo:hi + 1, b] = 2 * np.pi / (ell * (ell + 1))
    return edges, P, Q


def gauss_beam(fwhm_arcmin, lmax):
    return hp.gauss_beam(np.radians(fwhm_arcmin / 60.0), lmax=lmax)


cases = [
    {"name": "cl_bins8_beam90", "lmax": 64, "width": 8, "weighting": "cl", "beam": 90.0},
    {"name": "dl_bins12_nobeam", "lmax": 95, "width": 12, "weighting": "dl", "beam": 0.0},
]
for case in cases:
    lmax = case["lmax"]
    lmax_w = min(2 * lmax, 3 * NSIDE - 1)
    raw = pseudo_spectrum(sky, weights, lmax)
    wl = hp.anafast(weights, lmax=lmax_w, iter=0)
    M = coupling(wl, lmax)
    transfer = gauss_beam(case["beam"], lmax)
    edges, P, Q = binning(lmax, case["width"], case["weighting"])
    K = P @ M @ np.diag(transfer ** 2) @ Q
    master = np.linalg.solve(K, P @ raw)
    w2 = np.mean(weights ** 2)
    w2_estimate = P @ (raw / (w2 * transfer ** 2))
    tag = case["name"]
    case.update(
        {
            "nside": NSIDE,
            "lmax_weights": lmax_w,
            "iterations": 0,
            "edges": edges,
            "pseudo_cl": save(f"pseudo_cl_{tag}.npy", raw),
            "weight_cl": save(f"weight_cl_{tag}.npy", wl),
            "coupling": save(f"coupling_{tag}.npy", M),
            "kernel": save(f"kernel_{tag}.npy", K),
            "master": save(f"master_{tag}.npy", master),
            "w2_estimate": save(f"w2_estimate_{tag}.npy", w2_estimate),
            "transfer": save(f"transfer_{tag}.npy", transfer),
        }
    )
    manifest["cases"].append(case)
    print(tag, "master / w2 estimate:", np.round(master / w2_estimate, 4))

# --- 3j values from sympy --------------------------------------------------------------------
triples = [(1, 1, 0), (1, 1, 2), (2, 2, 2), (3, 4, 5), (10, 10, 10), (20, 13, 9), (50, 30, 40),
           (100, 100, 0), (100, 60, 48), (200, 150, 100), (300, 400, 500), (767, 767, 2),
           (767, 500, 1001), (700, 767, 1467), (4, 6, 3)]
values = [float(sympy.N(wigner_3j(a, b, c, 0, 0, 0), 30)) for a, b, c in triples]
manifest["wigner_3j"] = {"triples": triples, "values": save("wigner_3j_sympy.npy", values)}

# --- HEALPix pixel window from its definition ------------------------------------------------


def pixel_window(nside, k):
    """p_l^2 = (1/Npix) sum_p (4pi/(2l+1)) sum_m |mean over the 4^k NESTED sub-pixel centres of
    p of Y_lm|^2, scipy.special.sph_harm_y."""
    lmax = 3 * nside - 1
    npx = hp.nside2npix(nside)
    sub = nside * 2 ** k
    children = (np.arange(npx)[:, None] * 4 ** k + np.arange(4 ** k)[None, :]).ravel()
    th, ph = hp.pix2ang(sub, children, nest=True)
    out = np.zeros(lmax + 1)
    for ell in range(lmax + 1):
        s = 0.0
        for m in range(ell + 1):
            y = sp.sph_harm_y(ell, m, th, ph).reshape(npx, 4 ** k).mean(axis=1)
            s += (1.0 if m == 0 else 2.0) * np.sum(np.abs(y) ** 2)
        out[ell] = 4 * np.pi / (2 * ell + 1) * s / npx
    return out


manifest["pixel_window"] = []
for nside in [4, 8]:
    coarse = pixel_window(nside, 4)
    fine = pixel_window(nside, 5)
    window = np.sqrt((4 * fine - coarse) / 3.0)
    manifest["pixel_window"].append(
        {
            "nside": nside,
            "sub_levels": [4, 5],
            "values": save(f"pixel_window_nside{nside}.npy", window),
            "unextrapolated_difference": float(np.max(np.abs(np.sqrt(fine) - window))),
        }
    )
    print("pixel window", nside, window[-1])



def healpy_pixwin(nside):
    """healpy's pixel window table (temperature), from hp.pixwin or from the 1.14.0 wheel."""
    try:
        return hp.pixwin(nside), "healpy %s pixwin" % hp.__version__
    except Exception:
        wheel = sys.argv[1]
        name = "healpy/data/pixel_window_n%04d.fits" % nside
        with zipfile.ZipFile(wheel) as z, tempfile.TemporaryDirectory() as tmp:
            path = z.extract(name, tmp)
            # the same reading as healpy's pixwin: read_cl, temperature column
            return hp.read_cl(path)[0], "%s from %s, read with healpy %s read_cl" % (
                name, os.path.basename(wheel), hp.__version__)


manifest["pixel_window_tables"] = []
for nside in [4, 8, 64, 256]:
    table, origin = healpy_pixwin(nside)
    table = table[: 3 * nside]
    entry = {"nside": nside, "origin": origin,
             "values": save(f"pixel_window_healpy_nside{nside}.npy", table)}
    if nside in (4, 8):
        mine = np.load(os.path.join(OUT, f"pixel_window_nside{nside}.npy"))
        entry["definition_minus_table"] = float(np.max(np.abs(mine - table)))
    manifest["pixel_window_tables"].append(entry)
    print("healpy pixel window", nside, table[-1], entry.get("definition_minus_table"))

with open(os.path.join(OUT, "manifest.json"), "w") as f:
    json.dump(manifest, f, indent=1)
