#!/usr/bin/env python3
"""Reference maps for planisphere's galaxy-catalogue binning, computed with numpy and healpy.

Run by hand (not by CI), in a venv with healpy==1.20.1, astropy==8.0.2 and numpy:
    python3 reference-values/catalogue_binning_reference.py
Writes reference-values/catalogue_binning/:
  galaxies.csv   a small invented catalogue (header RA,DEC,E1,E2,WEIGHT,ID), with bad rows
  galaxies.fits  the same rows as an astropy binary table (float64 columns, int64 ID)
  expected.csv   per pixel holding a usable galaxy (NSIDE 16, RING): N, sum w, gamma1, gamma2,
                 noise variance, density contrast, from numpy.bincount with healpy.ang2pix
  kappa.csv      kappa_E, kappa_B on the footprint from healpy map2alm_spin / alm2map of the
                 binned shear (0 outside the footprint), lmax 3 NSIDE - 1, unsmoothed and with a
                 120 arcmin FWHM gauss_beam
  expected.json  NSIDE, row counts by reason, mean galaxies per footprint pixel, versions

The rules applied to rows are planisphere's (src/catalogue/screening.rs): a row is bad when a
value is not finite, |Dec| > 90, e1^2 + e2^2 >= 1, or w < 0; w == 0 is skipped; RA is wrapped
into [0, 360).
"""
import json
import os

import astropy
import healpy as hp
import numpy as np
from astropy.table import Table

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "catalogue_binning")
NSIDE = 16


def catalogue(rng, n):
    # a cap of radius ~25 degrees around (RA, Dec) = (40, -20), uniform on the sphere inside it
    cos_r = np.cos(np.radians(25.0))
    z = rng.uniform(cos_r, 1.0, n)
    a = rng.uniform(0.0, 2 * np.pi, n)
    s = np.sqrt(1 - z * z)
    local = np.stack([s * np.cos(a), s * np.sin(a), z])
    ra0, dec0 = np.radians(40.0), np.radians(-20.0)
    # rotate the north pole to (ra0, dec0)
    t = np.pi / 2 - dec0
    ry = np.array([[np.cos(t), 0, np.sin(t)], [0, 1, 0], [-np.sin(t), 0, np.cos(t)]])
    rz = np.array([[np.cos(ra0), -np.sin(ra0), 0], [np.sin(ra0), np.cos(ra0), 0], [0, 0, 1]])
    v = rz @ ry @ local
    ra = np.degrees(np.arctan2(v[1], v[0])) % 360.0
    dec = np.degrees(np.arcsin(np.clip(v[2], -1, 1)))
    e1 = rng.normal(0.0, 0.25, n)
    e2 = rng.normal(0.0, 0.25, n)
    big = e1 * e1 + e2 * e2 >= 0.9
    e1[big] *= 0.3
    e2[big] *= 0.3
    w = rng.uniform(0.5, 2.0, n)
    return ra, dec, e1, e2, w


def main():
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(20261205)
    n = 2000
    ra, dec, e1, e2, w = catalogue(rng, n)
    # bad and special rows, at fixed places
    e1[10] = np.nan          # not finite
    w[11] = np.inf           # not finite
    dec[12] = 95.0           # Dec out of range
    dec[13] = -90.5          # Dec out of range
    e1[14], e2[14] = 0.8, 0.6  # |e| = 1
    e1[15], e2[15] = 1.2, 0.0  # |e| > 1
    w[16] = -0.5             # negative weight
    w[17] = 0.0              # zero weight, skipped
    ra[18] = ra[18] + 360.0  # wrapped, used
    ra[19] = ra[19] - 360.0  # wrapped, used
    ident = np.arange(n, dtype=np.int64)

    with open(os.path.join(OUT, "galaxies.csv"), "w") as f:
        f.write("# invented galaxy catalogue for planisphere's binning test\n")
        f.write("RA,DEC,E1,E2,WEIGHT,ID\n")
        for i in range(n):
            vals = [repr(float(x)) for x in (ra[i], dec[i], e1[i], e2[i], w[i])]
            if i == 20:
                vals[2] = ""  # an empty field: not a number, a bad row
            f.write(",".join(vals) + f",{ident[i]}\n")
    e1_csv = e1.copy()
    e1_csv[20] = np.nan
    e1_fits = e1.copy()
    e1_fits[20] = np.nan
    t = Table([ra, dec, e1_fits, e2, w, ident], names=("RA", "DEC", "E1", "E2", "WEIGHT", "ID"))
    t["RA"].unit = "deg"
    t["DEC"].unit = "deg"
    t.write(os.path.join(OUT, "galaxies.fits"), format="fits", overwrite=True)

    e1 = e1_csv
    finite = np.isfinite(ra) & np.isfinite(dec) & np.isfinite(e1) & np.isfinite(e2) & np.isfinite(w)
    reasons = {}
    left = ~finite
    reasons["not_finite"] = int(left.sum())
    bad_dec = finite & ((dec < -90) | (dec > 90))
    reasons["dec_out_of_range"] = int(bad_dec.sum())
    ok = finite & ~bad_dec
    bad_e = ok & (e1 * e1 + e2 * e2 >= 1.0)
    reasons["ellipticity_too_large"] = int(bad_e.sum())
    ok &= ~bad_e
    neg = ok & (w < 0)
    reasons["negative_weight"] = int(neg.sum())
    ok &= ~neg
    zero = ok & (w == 0)
    reasons["zero_weight"] = int(zero.sum())
    ok &= ~zero

    npix = hp.nside2npix(NSIDE)
    ra_w = np.mod(ra[ok], 360.0)
    pix = hp.ang2pix(NSIDE, ra_w, dec[ok], lonlat=True)
    wk, e1k, e2k = w[ok], e1[ok], e2[ok]
    N = np.bincount(pix, minlength=npix)
    W = np.bincount(pix, weights=wk, minlength=npix)
    WE1 = np.bincount(pix, weights=wk * e1k, minlength=npix)
    WE2 = np.bincount(pix, weights=wk * e2k, minlength=npix)
    W2E2 = np.bincount(pix, weights=wk * wk * (e1k * e1k + e2k * e2k), minlength=npix)
    inside = N >= 1
    nbar = N[inside].mean()
    with open(os.path.join(OUT, "expected.csv"), "w") as f:
        f.write("pixel,galaxies,weight,gamma1,gamma2,noise_var,delta\n")
        for p in np.nonzero(inside)[0]:
            g1 = WE1[p] / W[p]
            g2 = WE2[p] / W[p]
            var = W2E2[p] / (2 * W[p] ** 2)
            delta = N[p] / nbar - 1
            f.write(f"{p},{N[p]},{float(W[p])!r},{float(g1)!r},{float(g2)!r},{float(var)!r},{float(delta)!r}\n")
    # convergence of the binned shear (0 outside the footprint), full-sky Kaiser-Squires:
    # kappa_lm = -sqrt(l(l+1)/((l+2)(l-1))) gamma_lm for E and B (Q = gamma1, U = gamma2),
    # no iterations of the analysis, unsmoothed and smoothed by a 120 arcmin FWHM Gaussian
    lmax = 3 * NSIDE - 1
    g1 = np.where(inside, WE1 / np.where(inside, W, 1.0), 0.0)
    g2 = np.where(inside, WE2 / np.where(inside, W, 1.0), 0.0)
    alm_e, alm_b = hp.map2alm_spin([g1, g2], 2, lmax=lmax)
    ell = np.arange(lmax + 1, dtype=float)
    ks = np.zeros(lmax + 1)
    ks[2:] = -np.sqrt(ell[2:] * (ell[2:] + 1) / ((ell[2:] + 2) * (ell[2:] - 1)))
    beam = hp.gauss_beam(np.radians(120.0 / 60.0), lmax=lmax)
    kappa = {}
    for name, f in (("", ks), ("_smooth120", ks * beam)):
        kappa["e" + name] = hp.alm2map(hp.almxfl(alm_e, f), NSIDE, lmax=lmax)
        kappa["b" + name] = hp.alm2map(hp.almxfl(alm_b, f), NSIDE, lmax=lmax)
    with open(os.path.join(OUT, "kappa.csv"), "w") as f:
        f.write("pixel,kappa_e,kappa_b,kappa_e_smooth120,kappa_b_smooth120\n")
        for p in np.nonzero(inside)[0]:
            vals = [float(kappa[k][p]) for k in ("e", "b", "e_smooth120", "b_smooth120")]
            f.write(f"{p}," + ",".join(repr(v) for v in vals) + "\n")
    # footprint with at least 5 galaxies
    inside5 = N >= 5
    with open(os.path.join(OUT, "expected.json"), "w") as f:
        json.dump({
            "nside": NSIDE,
            "rows": n,
            "used": int(ok.sum()),
            "left_out": reasons,
            "ra_wrapped": 2,
            "footprint_pixels": int(inside.sum()),
            "mean_galaxies": float(nbar),
            "footprint_pixels_min5": int(inside5.sum()),
            "mean_galaxies_min5": float(N[inside5].mean()),
            "versions": {"numpy": np.__version__, "healpy": hp.__version__,
                         "astropy": astropy.__version__},
        }, f, indent=1)
    print(f"{ok.sum()} of {n} rows used, {inside.sum()} pixels, nbar {nbar:.4f}")


if __name__ == "__main__":
    main()
