"""Lognormal targets for the synthesis texture checks, with their one-point moments and peak
counts computed by numpy, scipy and healpy.

Writes into synthesis_texture/:

* flat_lognormal_n{64,128}.npy: periodic flat lognormal fields kappa = exp(y) - 1 with y a
  Gaussian field (numpy FFT colouring of seeded white noise, red spectrum with a Gaussian
  cut-off) scaled to sigma_y = 0.6 around <y> = -sigma_y^2/2 (Hilbert, Hartlap & Schneider 2011,
  A&A 536, A85);
* sphere_lognormal_nside64.fits and sphere_cap_nside64.fits: a HEALPix lognormal map (RING,
  healpy.synfast of a red C_ell with a 2-pixel Gaussian beam, then the same transform) and a
  binary 30-degree cap as mask (healpy.query_disc);
* synthesis_texture.json: per target, skewness and excess kurtosis (scipy.stats.skew and
  scipy.stats.kurtosis with their defaults: bias=True population moments, kurtosis with
  fisher=True, i.e. m4/m2^2 - 3) of the field (flat) or of the mask's pixels (sphere), and
  peak counts above mean + nu * sd for nu = 0, 1, 2, 3:

  - flat: pixels strictly above their 8 periodic neighbours
    (scipy.ndimage.maximum_filter of the 8-neighbourhood footprint, mode="wrap");
  - sphere: mask pixels strictly above every existing neighbour of healpy.get_all_neighbours,
    all of which lie in the mask (mean and sd over the mask's pixels).

Library versions are recorded in the JSON. Run by hand (not by CI):
python3 reference-values/synthesis_texture_reference.py
"""

import json
import os

import healpy as hp
import numpy as np
import scipy
import scipy.ndimage
import scipy.stats

THRESHOLDS = [0.0, 1.0, 2.0, 3.0]
SIGMA_Y = 0.6


def lognormal(g):
    g = (g - g.mean()) / g.std()
    return np.exp(-SIGMA_Y**2 / 2 + SIGMA_Y * g) - 1.0


def flat_field(n, seed):
    rng = np.random.default_rng(seed)
    white = rng.standard_normal((n, n))
    k = np.fft.fftfreq(n) * 2 * np.pi  # radians per pixel; Nyquist at pi
    kx, ky = np.meshgrid(k, k, indexing="xy")
    kk = np.sqrt(kx**2 + ky**2)
    kk[0, 0] = 1.0
    amplitude = (kk / np.pi) ** -0.75 * np.exp(-0.5 * (kk / (0.25 * np.pi)) ** 2)
    amplitude[0, 0] = 0.0
    g = np.real(np.fft.ifft2(np.fft.fft2(white) * amplitude))
    return lognormal(g)


def flat_peaks(f):
    footprint = np.ones((3, 3), bool)
    footprint[1, 1] = False
    neighbour_max = scipy.ndimage.maximum_filter(f, footprint=footprint, mode="wrap")
    heights = (f[f > neighbour_max] - f.mean()) / f.std()
    return [int((heights > nu).sum()) for nu in THRESHOLDS]


def moments(values):
    return {
        "skewness": float(scipy.stats.skew(values)),
        "excess_kurtosis": float(scipy.stats.kurtosis(values)),
    }


def sphere_map(nside, seed):
    lmax = 3 * nside - 1
    ell = np.arange(lmax + 1)
    cl = (ell + 10.0) ** -2.0
    cl[:2] = 0.0
    np.random.seed(seed)
    fwhm = 2.0 * hp.nside2resol(nside)
    g = hp.synfast(cl, nside, lmax=lmax, fwhm=fwhm, new=True)
    return lognormal(g)


def sphere_peaks(m, inside):
    nside = hp.npix2nside(m.size)
    pix = np.flatnonzero(inside)
    values = m[pix]
    mean, sd = values.mean(), values.std()
    neighbours = hp.get_all_neighbours(nside, pix)  # (8, npix), -1 where absent
    heights = []
    for k, p in enumerate(pix):
        nb = neighbours[:, k]
        nb = nb[nb >= 0]
        if not inside[nb].all():
            continue
        if (m[p] > m[nb]).all():
            heights.append((m[p] - mean) / sd)
    heights = np.array(heights)
    return [int((heights > nu).sum()) for nu in THRESHOLDS]


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    out = os.path.join(here, "synthesis_texture")
    os.makedirs(out, exist_ok=True)
    doc = {
        "libraries": {
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "healpy": hp.__version__,
        },
        "thresholds": THRESHOLDS,
        "sigma_y": SIGMA_Y,
    }
    for n, seed in [(64, 3), (128, 4)]:
        f = flat_field(n, seed)
        name = f"flat_lognormal_n{n}"
        np.save(os.path.join(out, name + ".npy"), f)
        doc[name] = {**moments(f.ravel()), "peak_counts": flat_peaks(f)}
    nside = 64
    m = sphere_map(nside, 7)
    centre = hp.ang2vec(np.radians(60.0), np.radians(30.0))
    inside = np.zeros(m.size, bool)
    inside[hp.query_disc(nside, centre, np.radians(30.0))] = True
    hp.write_map(
        os.path.join(out, f"sphere_lognormal_nside{nside}.fits"), m, overwrite=True, dtype=np.float64
    )
    hp.write_map(
        os.path.join(out, f"sphere_cap_nside{nside}.fits"),
        inside.astype(np.float64),
        overwrite=True,
        dtype=np.float64,
    )
    doc[f"sphere_lognormal_nside{nside}"] = {
        **moments(m[inside]),
        "peak_counts": sphere_peaks(m, inside),
        "mask_pixels": int(inside.sum()),
    }
    with open(os.path.join(out, "synthesis_texture.json"), "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")
    print(json.dumps(doc, indent=1))


if __name__ == "__main__":
    main()
