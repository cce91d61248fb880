#!/usr/bin/env python3
"""A HEALPix FITS map whose bad pixels are marked by a BAD_DATA header value.

Run by hand (not by CI):  python3 reference-values/fits_bad_data_reference.py

The HEALPix FITS convention (Gorski et al. 2005, HEALPix FITS format description) lets a file
name its bad-pixel sentinel in the BAD_DATA keyword. healpy 1.20.1 writes the map
(healpy.write_map, float32 column), astropy 8.0.2 adds BAD_DATA = -999.0 to the table header,
and numpy 2 lists the pixels equal to it (compared in float32, as stored) and the mean of the
others into fits/bad_data_expected.json.
"""
import json
import os
import warnings

import healpy as hp
import numpy as np
from astropy.io import fits as pf

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "fits")

nside = 4
npix = hp.nside2npix(nside)
rng = np.random.default_rng(14)
values = rng.normal(size=npix).astype(np.float32)
bad = sorted(int(i) for i in rng.choice(npix, size=20, replace=False))
values[bad] = np.float32(-999.0)
path = os.path.join(OUT, "bad_data_nside4_float32.fits")
with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    hp.write_map(path, values, dtype=np.float32, overwrite=True)
with pf.open(path, mode="update") as f:
    f[1].header["BAD_DATA"] = (-999.0, "Sentinel value for bad pixels")

stored = pf.open(path)[1].data.field(0).ravel()
is_bad = stored == np.float32(-999.0)
expected = {
    "source": "healpy %s write_map, astropy header edit, numpy %s" % (hp.__version__, np.__version__),
    "file": os.path.basename(path),
    "bad_data": -999.0,
    "bad_pixels": [int(i) for i in np.nonzero(is_bad)[0]],
    "valid_pixels": int((~is_bad).sum()),
    "valid_mean": float(stored[~is_bad].astype(np.float64).mean()),
}
with open(os.path.join(OUT, "bad_data_expected.json"), "w") as f:
    json.dump(expected, f, indent=1)
print(expected["valid_pixels"], expected["valid_mean"])
