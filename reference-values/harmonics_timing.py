"""Wall-clock timing of healpy's alm2map and map2alm(iter=0) for comparison with planisphere's
harmonic transforms (examples/harmonics_timing.rs). Run by hand:

    OMP_NUM_THREADS=1 python3 reference-values/harmonics_timing.py
    OMP_NUM_THREADS=2 python3 reference-values/harmonics_timing.py

Sizes: Nside 256, 512, 1024 with lmax = 2 Nside (mmax = lmax). Best of a few repetitions.
"""
import os
import time

import healpy as hp
import numpy as np

print(f"healpy {hp.__version__}, numpy {np.__version__}, OMP_NUM_THREADS={os.environ.get('OMP_NUM_THREADS')}")
rng = np.random.default_rng(7)
print(f"{'nside':>6} {'lmax':>6} {'alm2map [s]':>12} {'map2alm iter0 [s]':>18}")
for nside in (256, 512, 1024):
    lmax = 2 * nside
    nalm = hp.Alm.getsize(lmax)
    alm = rng.standard_normal(nalm) + 1j * rng.standard_normal(nalm)
    alm[:lmax + 1] = alm[:lmax + 1].real
    reps = 3 if nside < 1024 else 2
    t_syn = []
    t_ana = []
    for _ in range(reps):
        t0 = time.perf_counter()
        m = hp.alm2map(alm, nside, lmax=lmax, mmax=lmax)
        t_syn.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        hp.map2alm(m, lmax=lmax, mmax=lmax, iter=0, use_weights=False)
        t_ana.append(time.perf_counter() - t0)
    print(f"{nside:>6} {lmax:>6} {min(t_syn):>12.4f} {min(t_ana):>18.4f}")
