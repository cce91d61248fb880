"""CPU and wall time of ducc0's spin-0 synthesis and adjoint synthesis on the HEALPix grid, for
comparison with planisphere's harmonic transforms (examples/harmonics_ducc0_comparison.rs prints
the same table for ours). A speed reference only: ducc0 is never a dependency of the crate.

Run by hand, one process per size so that /usr/bin/time -v gives each its own peak RSS:

    python3 -m venv /tmp/venv-ducc && /tmp/venv-ducc/bin/pip install ducc0 healpy numpy
    /usr/bin/time -v /tmp/venv-ducc/bin/python reference-values/harmonics_ducc0_timing.py 1024

Sizes: the NSIDE given (default 512 and 1024), lmax = mmax = 3 NSIDE - 1, one thread
(nthreads=1). Coefficients are random (healpy's triangular m-major layout, real at m = 0).
Times are the best of `reps` repetitions (3, 2, then 1 from NSIDE 2048 up); CPU time (time.process_time) is the figure to
compare on a loaded machine.
"""
import sys
import time

import ducc0
import numpy as np


def healpix_geometry(nside):
    """Ring colatitudes, pixel counts, first-pixel offsets and azimuths of the RING scheme."""
    ring_count = 4 * nside - 1
    theta = np.empty(ring_count)
    nphi = np.empty(ring_count, dtype=np.uint64)
    phi0 = np.empty(ring_count)
    ringstart = np.empty(ring_count, dtype=np.uint64)
    npix = 12 * nside * nside
    for i in range(1, ring_count + 1):
        i_n = i if i <= 2 * nside else 4 * nside - i
        if i_n < nside:
            z = 1.0 - i_n * i_n / (3.0 * nside * nside)
            n = 4 * i_n
            shifted = True
        else:
            z = (2 * nside - i_n) * 2.0 / (3.0 * nside)
            n = 4 * nside
            shifted = (i_n + nside) % 2 == 0
        if i > 2 * nside:
            z = -z
        if i < nside:
            first = 2 * i * (i - 1)
        elif i <= 3 * nside:
            first = 2 * nside * (nside - 1) + 4 * nside * (i - nside)
        else:
            ip = 4 * nside - i
            first = npix - 2 * ip * (ip + 1)
        theta[i - 1] = np.arccos(z)
        nphi[i - 1] = n
        phi0[i - 1] = np.pi / n if shifted else 0.0
        ringstart[i - 1] = first
    return theta, nphi, phi0, ringstart


def best(reps, f):
    wall, cpu, out = [], [], None
    for _ in range(reps):
        w0, c0 = time.perf_counter(), time.process_time()
        out = f()
        cpu.append(time.process_time() - c0)
        wall.append(time.perf_counter() - w0)
    return min(cpu), min(wall), out


def main():
    sizes = [int(a) for a in sys.argv[1:]] or [512, 1024]
    print(f"ducc0 {ducc0.__version__}, numpy {np.__version__}, nthreads=1")
    print(f"{'nside':>6} {'lmax':>6} {'synth cpu [s]':>14} {'synth wall [s]':>15} "
          f"{'adjoint cpu [s]':>16} {'adjoint wall [s]':>17}")
    rng = np.random.default_rng(7)
    for nside in sizes:
        lmax = 3 * nside - 1
        theta, nphi, phi0, ringstart = healpix_geometry(nside)
        nalm = (lmax + 1) * (lmax + 2) // 2
        alm = rng.standard_normal(nalm) + 1j * rng.standard_normal(nalm)
        alm[: lmax + 1] = alm[: lmax + 1].real
        alm = alm.reshape(1, -1)
        geom = dict(theta=theta, nphi=nphi, phi0=phi0, ringstart=ringstart, spin=0,
                    lmax=lmax, mmax=lmax, nthreads=1)
        # fewer repetitions for large maps (one from NSIDE 2048 up), as the Rust example
        reps = 3 if nside <= 512 else 2 if nside <= 1024 else 1
        map_out = np.empty((1, 12 * nside * nside))
        c_syn, w_syn, m = best(reps, lambda: ducc0.sht.experimental.synthesis(
            alm=alm, map=map_out, **geom))
        alm_out = np.empty_like(alm)
        c_adj, w_adj, _ = best(reps, lambda: ducc0.sht.experimental.adjoint_synthesis(
            map=m, alm=alm_out, **geom))
        print(f"{nside:>6} {lmax:>6} {c_syn:>14.3f} {w_syn:>15.3f} {c_adj:>16.3f} {w_adj:>17.3f}",
              flush=True)


if __name__ == "__main__":
    main()
