#!/usr/bin/env python3
"""Reference ring-wise interpolation weights from healpy's get_interp_weights.

Run by hand (not by CI):  python3 reference-values/ring_interpolation_reference.py
Needs healpy 1.20.1 and numpy. Writes reference-values/ring_interpolation/weights.csv with rows
  nside,theta,phi,p0,p1,p2,p3,w0,w1,w2,w3
(RING pixel indices and weights, angles in radians) for random directions, directions next to
the poles and directions exactly on rings and meridians of pixel centres.
"""
import os

import healpy as hp
import numpy as np

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "ring_interpolation")


def main():
    assert hp.__version__ == "1.20.1", hp.__version__
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(2005759)
    rows = []
    for nside in (1, 2, 16, 256):
        m = 3000
        theta = np.arccos(rng.uniform(-1.0, 1.0, m))
        phi = rng.uniform(0.0, 2.0 * np.pi, m)
        # Next to the poles (above the first ring / below the last).
        t_first = hp.pix2ang(nside, 0)[0]
        near = rng.uniform(0.0, t_first, 100)
        theta = np.concatenate([theta, near, np.pi - near])
        phi = np.concatenate([phi, rng.uniform(0.0, 2.0 * np.pi, 200)])
        # Pixel centres themselves.
        pix = rng.integers(0, hp.nside2npix(nside), 100)
        t, p = hp.pix2ang(nside, pix)
        theta = np.concatenate([theta, t])
        phi = np.concatenate([phi, p])
        pp, ww = hp.get_interp_weights(nside, theta, phi)
        for k in range(len(theta)):
            rows.append([nside, theta[k], phi[k]] + list(pp[:, k]) + list(ww[:, k]))
    with open(os.path.join(OUT, "weights.csv"), "w") as f:
        f.write("# healpy %s get_interp_weights (RING)\n" % hp.__version__)
        f.write("nside,theta,phi,p0,p1,p2,p3,w0,w1,w2,w3\n")
        for r in rows:
            f.write("%d,%.17g,%.17g,%d,%d,%d,%d,%.17g,%.17g,%.17g,%.17g\n" % tuple(r))
    print("wrote %d rows to %s" % (len(rows), OUT))


if __name__ == "__main__":
    main()
