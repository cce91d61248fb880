"""The whole-footprint scattering measurement as a user would script it with numpy + healpy.

This is the yardstick of `examples/measure_speed_limit.rs`: the straightforward pipeline for the
same transform as `planisphere measure`, written from the formulas, not tuned and not slowed down.

  * tile centres: the pixel centres of an NSIDE 8 HEALPix grid (768 centres);
  * patches: n x n gnomonic grids (default n = 128) at the map's mean pixel spacing
    sqrt(4 pi / Npix), plane pixel (ix, iy) at x = (ix - n/2 + 1/2) D, y = (iy - n/2 + 1/2) D,
    x toward increasing longitude, y toward the north; the inverse gnomonic projection is
    Snyder 1987 (Map Projections - A Working Manual, USGS PP 1395, eqs. 20-14 and 20-15);
  * sampling: bilinear, healpy `get_interp_val`, of the map and of the mask;
  * a patch is kept when the mask covers more than half of it (mean interpolated mask > 0.5);
  * filter input I = m (f - <f>_m), m the interpolated mask, <.>_m the m-weighted patch mean;
  * Morlet filters built in Fourier space from the formulas of src/scattering/filters.rs (Bruna & Mallat
    2013, IEEE TPAMI 35, 1872): sigma_j = 0.8 * 2**j pixels, xi_j = 3 pi / (4 * 2**j) rad/pixel,
    theta_l = pi l / L, slant s = 4 / L, unit-L1 envelope g^(k) = exp(-sigma^2 (k_par^2 +
    k_perp^2 / s^2) / 2), psi^(k) = g^(k - xi e) - beta g^(k), periodised over the 2 pi Fourier
    copies within reach of exp(-40), beta = sum_m g^(2 pi m - xi e) / sum_m g^(2 pi m);
  * convolutions: numpy complex128 fft2 of the input, one ifft2 per filter (circular, no halo);
  * first layer U1 = |I * psi_{j,l}|, second layer U2 = |U1 * psi_{j2,l2}| for j2 > j1;
  * pooling: S = sum over patches of sum_x m U / sum over patches of sum_x m.

Usage (run by hand; never needed by `cargo test`):

  pip install healpy numpy
  python3 reference-values/measure_pipeline_numpy.py MAP.fits MASK.fits -J 5 -L 4 -o out.json

The JSON holds wall time (time.perf_counter), CPU time (time.process_time), the number of
patches, peak memory (resource.getrusage ru_maxrss), the library versions and the pooled
coefficients S1[j][l] and S2[j1][l1][j2][l2] (null where j2 <= j1).
"""

import argparse
import json
import resource
import sys
import time

import numpy as np

try:
    import healpy as hp
except ImportError:  # the caller prints how to install it
    sys.stderr.write("healpy is not installed: pip install healpy numpy\n")
    sys.exit(3)


def morlet_bank(n, J, L):
    """psi^_{j,l} on the n x n DFT grid (real arrays, [iy, ix] with kx along columns)."""
    q = np.fft.fftfreq(n, d=1.0 / n)  # signed frequency index
    k = 2 * np.pi * q / n
    KX, KY = np.meshgrid(k, k, indexing="xy")
    s = 4.0 / L
    bank = np.empty((J, L, n, n))
    for j in range(J):
        sigma = 0.8 * 2**j
        xi = 3 * np.pi / (4 * 2**j)
        width = max(s, 1.0) / sigma * np.sqrt(2.0)
        m_max = int(np.ceil((np.pi + xi + np.sqrt(80.0) * width) / (2 * np.pi)))
        copies = np.arange(-m_max, m_max + 1) * 2 * np.pi
        for l in range(L):
            theta = np.pi * l / L
            ct, st = np.cos(theta), np.sin(theta)

            def envelope(kx, ky):
                kpar = kx * ct + ky * st
                kperp = -kx * st + ky * ct
                return np.exp(-(sigma**2) * (kpar**2 + kperp**2 / s**2) / 2)

            cx, cy = xi * ct, xi * st
            num = sum(envelope(px - cx, py - cy) for py in copies for px in copies)
            den = sum(envelope(px, py) for py in copies for px in copies)
            beta = num / den
            psi = np.zeros((n, n))
            for py in copies:
                for px in copies:
                    psi += envelope(KX + px - cx, KY + py - cy) - beta * envelope(KX + px, KY + py)
            bank[j, l] = psi
    return bank


def gnomonic_grid(theta0, phi0, n, delta):
    """Colatitudes and longitudes of the n x n plane pixel centres around (theta0, phi0)."""
    c = (np.arange(n) - n / 2 + 0.5) * delta
    x, y = np.meshgrid(c, c, indexing="xy")
    lat0 = np.pi / 2 - theta0
    rho = np.hypot(x, y)
    cc = np.arctan(rho)
    sin_c, cos_c = np.sin(cc), np.cos(cc)
    lat = np.arcsin(cos_c * np.sin(lat0) + y * sin_c * np.cos(lat0) / rho)
    lon = phi0 + np.arctan2(x * sin_c, rho * np.cos(lat0) * cos_c - y * np.sin(lat0) * sin_c)
    return np.pi / 2 - lat, np.mod(lon, 2 * np.pi)


def measure(map_values, mask_values, J, L, n, centre_nside):
    nside = hp.npix2nside(map_values.size)
    delta = np.sqrt(4 * np.pi / map_values.size)
    bank = morlet_bank(n, J, L)
    s1 = np.zeros((J, L))
    s2 = np.zeros((J, L, J, L))
    total_weight = 0.0
    patches = 0
    theta_c, phi_c = hp.pix2ang(centre_nside, np.arange(hp.nside2npix(centre_nside)))
    for t0, p0 in zip(theta_c, phi_c):
        theta, phi = gnomonic_grid(t0, p0, n, delta)
        m = hp.get_interp_val(mask_values, theta, phi)
        if m.mean() <= 0.5:
            continue
        f = hp.get_interp_val(map_values, theta, phi)
        patches += 1
        sm = m.sum()
        total_weight += sm
        field = m * (f - (m * f).sum() / sm)
        spectrum = np.fft.fft2(field)
        for j1 in range(J):
            for l1 in range(L):
                u1 = np.abs(np.fft.ifft2(spectrum * bank[j1, l1]))
                s1[j1, l1] += (m * u1).sum()
                if j1 + 1 < J:
                    u1_spectrum = np.fft.fft2(u1)
                    for j2 in range(j1 + 1, J):
                        for l2 in range(L):
                            u2 = np.abs(np.fft.ifft2(u1_spectrum * bank[j2, l2]))
                            s2[j1, l1, j2, l2] += (m * u2).sum()
    if patches == 0:
        raise SystemExit("no patch is more than half covered by the mask")
    s1 /= total_weight
    s2 /= total_weight
    s2_out = [
        [[[float(s2[a, b, c, d]) if c > a else None for d in range(L)] for c in range(J)]
         for b in range(L)]
        for a in range(J)
    ]
    return nside, patches, s1.tolist(), s2_out


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("map")
    parser.add_argument("mask")
    parser.add_argument("-J", type=int, default=5)
    parser.add_argument("-L", type=int, default=4)
    parser.add_argument("--patch-pixels", type=int, default=128)
    parser.add_argument("--centre-nside", type=int, default=8)
    parser.add_argument("-o", "--output", required=True)
    args = parser.parse_args()
    wall0 = time.perf_counter()
    cpu0 = time.process_time()
    map_values = hp.read_map(args.map, dtype=np.float64)
    mask_values = hp.read_map(args.mask, dtype=np.float64)
    if map_values.size != mask_values.size:
        raise SystemExit("map and mask have different NSIDE")
    nside, patches, s1, s2 = measure(
        map_values, mask_values, args.J, args.L, args.patch_pixels, args.centre_nside
    )
    out = {
        "pipeline": "numpy + healpy, whole footprint, bilinear gnomonic patches",
        "numpy": np.__version__,
        "healpy": hp.__version__,
        "python": sys.version.split()[0],
        "nside": int(nside),
        "J": args.J,
        "L": args.L,
        "patch_pixels": args.patch_pixels,
        "centre_nside": args.centre_nside,
        "patches": patches,
        "footprint_pixels": int((mask_values > 0).sum()),
        "wall_seconds": time.perf_counter() - wall0,
        "cpu_seconds": time.process_time() - cpu0,
        "peak_memory_kib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
        "S1": s1,
        "S2": s2,
    }
    with open(args.output, "w") as fh:
        json.dump(out, fh, indent=1)


if __name__ == "__main__":
    main()
