"""Independent slow reference for the planisphere scattering transform (periodic flat maps).

Written from the formulas only (Bruna & Mallat 2013, IEEE TPAMI 35, 1872, Morlet family):
the Morlet wavelets are built in *pixel space*, sampled at integer displacements and wrapped onto
the n x n torus by summing shifted copies; convolutions are circular (numpy FFT); moduli and
plain means follow.

  sigma_j = 0.8 * 2**j, xi_j = 3*pi / (4 * 2**j), theta_l = pi*l/L, slant s = 4/L,
  g(u) = s/(2 pi sigma^2) exp(-(u_par^2 + s^2 u_perp^2) / (2 sigma^2)),
  psi(u) = g(u) (exp(i xi u_par) - beta), beta such that sum_u psi(u) = 0 on the torus.

Outputs (JSON) for each configuration: the input map, mean, variance,
S1[j][l] = mean |f * psi_jl|, P[j][l] = mean |f * psi_jl|^2,
S2[j1][l1][j2][l2] = mean ||f * psi_j1l1| * psi_j2l2| (j2 > j1, else null).

Run by hand (not by CI): python3 reference-values/scattering_reference.py
numpy version is recorded in the output.
"""

import json
import os

import numpy as np


def morlet_on_torus(n, j, l, L, copies=6):
    sigma = 0.8 * 2**j
    xi = 3 * np.pi / (4 * 2**j)
    theta = np.pi * l / L
    s = 4.0 / L
    e = np.array([np.cos(theta), np.sin(theta)])
    x = np.arange(n)
    # iy rows, ix columns
    X, Y = np.meshgrid(x, x, indexing="xy")
    env = np.zeros((n, n))
    wave = np.zeros((n, n), dtype=complex)
    for my in range(-copies, copies + 1):
        for mx in range(-copies, copies + 1):
            ux = X + n * mx
            uy = Y + n * my
            upar = ux * e[0] + uy * e[1]
            uperp = -ux * e[1] + uy * e[0]
            gg = s / (2 * np.pi * sigma**2) * np.exp(-(upar**2 + s**2 * uperp**2) / (2 * sigma**2))
            env += gg
            wave += gg * np.exp(1j * xi * upar)
    beta = wave.sum() / env.sum()
    return wave - beta * env


def circular_convolve(f, psi):
    # (f * psi)(x) = sum_y f(y) psi(x - y) on the torus
    return np.fft.ifft2(np.fft.fft2(f) * np.fft.fft2(psi))


def reference(n, J, L, seed):
    rng = np.random.default_rng(seed)
    # A non-Gaussian test map: a smoothed Gaussian field plus a few point sources.
    white = rng.standard_normal((n, n))
    k = np.fft.fftfreq(n) * 2 * np.pi
    KX, KY = np.meshgrid(k, k, indexing="xy")
    f = np.real(np.fft.ifft2(np.fft.fft2(white) / (1 + (KX**2 + KY**2) / 0.5)))
    for _ in range(5):
        iy, ix = rng.integers(0, n, 2)
        f[iy, ix] += 3.0
    psis = [[morlet_on_torus(n, j, l, L) for l in range(L)] for j in range(J)]
    s1 = [[None] * L for _ in range(J)]
    p = [[None] * L for _ in range(J)]
    s2 = [[[[None] * L for _ in range(J)] for _ in range(L)] for _ in range(J)]
    for j1 in range(J):
        for l1 in range(L):
            u1 = np.abs(circular_convolve(f, psis[j1][l1]))
            s1[j1][l1] = float(u1.mean())
            p[j1][l1] = float((u1**2).mean())
            for j2 in range(j1 + 1, J):
                for l2 in range(L):
                    u2 = np.abs(circular_convolve(u1, psis[j2][l2]))
                    s2[j1][l1][j2][l2] = float(u2.mean())
    # Littlewood-Paley sum A(k) = sum_{j,l} (|psi_hat(k)|^2 + |psi_hat(-k)|^2)/2, min/max over
    # the band xi_{J-1} <= |k| <= xi_0 (rad/pixel), from the pixel-space filters' DFT.
    lp = np.zeros((n, n))
    for j in range(J):
        for l in range(L):
            h = np.fft.fft2(psis[j][l])
            hm = np.roll(np.flip(h, axis=(0, 1)), 1, axis=(0, 1))  # h(-k)
            lp += 0.5 * (np.abs(h) ** 2 + np.abs(hm) ** 2)
    kk = np.sqrt(KX**2 + KY**2)
    band = (kk >= 3 * np.pi / (4 * 2 ** (J - 1))) & (kk <= 3 * np.pi / 4)
    return {
        "littlewood_paley_min": float(lp[band].min()),
        "littlewood_paley_max": float(lp[band].max()),
        "size": n,
        "scales": J,
        "orientations": L,
        "seed": seed,
        "map_row_major": [float(v) for v in f.ravel()],
        "mean": float(f.mean()),
        "variance": float(f.var()),
        "first_order": s1,
        "band_power": p,
        "second_order": s2,
    }


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    out_dir = os.path.join(here, "scattering")
    os.makedirs(out_dir, exist_ok=True)
    for (n, J, L, seed) in [(32, 3, 4, 11), (32, 3, 8, 12), (32, 4, 6, 13), (64, 5, 4, 14)]:
        data = reference(n, J, L, seed)
        data["generator"] = f"scattering_reference.py with numpy {np.__version__}"
        path = os.path.join(out_dir, f"periodic_n{n}_J{J}_L{L}.json")
        tmp = path + ".tmp"
        with open(tmp, "w") as fh:
            json.dump(data, fh)
        os.replace(tmp, path)
        print("wrote", path)


if __name__ == "__main__":
    main()
