#!/usr/bin/env python3
"""Reference values for planisphere's gnomonic (TAN) projection, from astropy's WCS.

Run by hand (not by CI):  python3 reference-values/projection_reference.py
Needs astropy 8.0.2 and numpy. Writes, in reference-values/projection/:
  forward.csv  lon0,lat0,lon,lat,x,y   sky → plane, degrees
  inverse.csv  lon0,lat0,x,y,lon,lat   plane → sky, degrees
Each row uses a TAN WCS with CTYPE RA---TAN/DEC--TAN, CRVAL = tangent point (lon0, lat0),
CDELT = 1 (so pixel offsets are the intermediate world coordinates in degrees), CRPIX = 0 with
origin 1 (pixel = CRPIX + x/CDELT = x), and the default LONPOLE = 180° of zenithal projections
(Calabretta & Greisen 2002, A&A 395, 1077). x grows with longitude, y toward the north.
"""
import os

import astropy
import numpy as np
from astropy.wcs import WCS

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "projection")
N_TANGENT = 100  # tangent points
N_PER_TANGENT = 120  # points per tangent point: 12 000 points in total
MAX_DISTANCE_DEG = 70.0


def tan_wcs(lon0, lat0):
    w = WCS(naxis=2)
    w.wcs.ctype = ["RA---TAN", "DEC--TAN"]
    w.wcs.crval = [lon0, lat0]
    w.wcs.cdelt = [1.0, 1.0]
    w.wcs.crpix = [0.0, 0.0]
    return w


def random_directions(rng, size):
    """Uniform on the sphere: lon in [0, 360), lat = asin(u), u uniform in [-1, 1]."""
    lon = rng.uniform(0.0, 360.0, size)
    lat = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, size)))
    return lon, lat


def main():
    assert astropy.__version__ == "8.0.2", astropy.__version__
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(20021077)
    lon0s, lat0s = random_directions(rng, N_TANGENT)
    # Include tangent points at and next to the poles and on the equator.
    lon0s[:4] = [0.0, 123.0, 250.0, 10.0]
    lat0s[:4] = [90.0, -90.0, 89.999, 0.0]
    fwd, inv = [], []
    for lon0, lat0 in zip(lon0s, lat0s):
        w = tan_wcs(lon0, lat0)
        # Sky points within MAX_DISTANCE_DEG of the tangent point: offsets drawn in the plane.
        rho = np.radians(MAX_DISTANCE_DEG) * np.sqrt(rng.uniform(0.0, 1.0, N_PER_TANGENT))
        az = rng.uniform(0.0, 2.0 * np.pi, N_PER_TANGENT)
        r_deg = np.degrees(np.tan(rho))
        xy = np.column_stack([r_deg * np.sin(az), r_deg * np.cos(az)])
        sky = w.wcs_pix2world(xy, 1)
        back = w.wcs_world2pix(sky, 1)
        for (lon, lat), (x, y) in zip(sky, back):
            fwd.append((lon0, lat0, lon % 360.0, lat, x, y))
        # Plane points for the inverse, independently drawn.
        rho = np.radians(MAX_DISTANCE_DEG) * np.sqrt(rng.uniform(0.0, 1.0, N_PER_TANGENT))
        az = rng.uniform(0.0, 2.0 * np.pi, N_PER_TANGENT)
        r_deg = np.degrees(np.tan(rho))
        xy = np.column_stack([r_deg * np.sin(az), r_deg * np.cos(az)])
        sky = w.wcs_pix2world(xy, 1)
        for (x, y), (lon, lat) in zip(xy, sky):
            inv.append((lon0, lat0, x, y, lon % 360.0, lat))
    with open(os.path.join(OUT, "forward.csv"), "w") as f:
        f.write("# astropy %s TAN WCS, CDELT 1, CRPIX 0 (origin 1); degrees\n" % astropy.__version__)
        f.write("lon0,lat0,lon,lat,x,y\n")
        for row in fwd:
            f.write(",".join("%.17g" % v for v in row) + "\n")
    with open(os.path.join(OUT, "inverse.csv"), "w") as f:
        f.write("# astropy %s TAN WCS, CDELT 1, CRPIX 0 (origin 1); degrees\n" % astropy.__version__)
        f.write("lon0,lat0,x,y,lon,lat\n")
        for row in inv:
            f.write(",".join("%.17g" % v for v in row) + "\n")
    print("wrote %d forward and %d inverse rows to %s" % (len(fwd), len(inv), OUT))


if __name__ == "__main__":
    main()
