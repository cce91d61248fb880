"""Independent numpy reference for the orientation-harmonic summary (src/scattering/statistics.rs).

The scattering coefficients come from the pixel-space Morlet implementation of
scattering_reference.py (same folder); the summary items are computed here from their
formulas, with complex exponentials:

  h_m(j) = sum_l S1(j,l) exp(-2 pi i m l / L)
  T(j1,j2,D) = sum_l1 S2(j1, l1, j2, (l1 + D) mod L)
  modulus_j = h_0(j) / L                 modulus_anisotropy_j = |h_1(j)| / h_0(j)
  intermittency_j1_j2 = sum_D T / (L h_0(j1))
  alignment_j1_j2 = Re sum_D T exp(2 pi i D / L) / sum_D T
  mean, rms = sqrt(variance)

Outputs (summary/summary_reference.json):
  fixed: a few maps (row-major) with their items, for a per-map comparison;
  white_noise: mean and standard error of every item over an ensemble of unit white-noise
  fields (numpy default_rng), i.e. the white-noise expectation of each item.

Run by hand (not by CI): python3 reference-values/summary_reference.py
numpy version is recorded in the output.
"""

import json
import os
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from scattering_reference import circular_convolve, morlet_on_torus  # noqa: E402


def coefficients(f, psis, J, L):
    s1 = np.zeros((J, L))
    s2 = np.full((J, L, J, L), np.nan)
    for j1 in range(J):
        for l1 in range(L):
            u1 = np.abs(circular_convolve(f, psis[j1][l1]))
            s1[j1, l1] = u1.mean()
            for j2 in range(j1 + 1, J):
                for l2 in range(L):
                    s2[j1, l1, j2, l2] = np.abs(circular_convolve(u1, psis[j2][l2])).mean()
    return s1, s2


def summary(f, s1, s2, J, L):
    items = {"mean": float(f.mean()), "rms": float(np.sqrt(f.var()))}
    ls = np.arange(L)
    for j in range(J):
        h0 = s1[j].sum()
        items[f"modulus_j{j}"] = float(h0 / L)
    for j in range(J):
        h0 = s1[j].sum()
        h1 = (s1[j] * np.exp(-2j * np.pi * ls / L)).sum()
        items[f"modulus_anisotropy_j{j}"] = float(abs(h1) / h0)
    t = {}
    for j1 in range(J):
        for j2 in range(j1 + 1, J):
            t[(j1, j2)] = np.array(
                [sum(s2[j1, l1, j2, (l1 + d) % L] for l1 in range(L)) for d in range(L)]
            )
    for j1 in range(J):
        for j2 in range(j1 + 1, J):
            items[f"intermittency_j{j1}_j{j2}"] = float(t[(j1, j2)].sum() / (L * s1[j1].sum()))
    for j1 in range(J):
        for j2 in range(j1 + 1, J):
            tt = t[(j1, j2)]
            items[f"alignment_j{j1}_j{j2}"] = float(
                (tt * np.exp(2j * np.pi * ls / L)).sum().real / tt.sum()
            )
    return items


def fixed_map(n, seed):
    # anisotropic non-Gaussian map: a squared, x-smoothed Gaussian field plus point sources
    rng = np.random.default_rng(seed)
    g = rng.standard_normal((n, n))
    k = np.fft.fftfreq(n) * 2 * np.pi
    kx, ky = np.meshgrid(k, k, indexing="xy")
    g = np.real(np.fft.ifft2(np.fft.fft2(g) / (1 + (4 * kx**2 + ky**2) / 0.5)))
    f = g**2 + 0.3 * g
    for _ in range(4):
        iy, ix = rng.integers(0, n, 2)
        f[iy, ix] += 2.0
    return f


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    out_dir = os.path.join(here, "summary")
    os.makedirs(out_dir, exist_ok=True)
    fixed = []
    for (n, J, L, seed) in [(32, 3, 2, 21), (32, 3, 3, 22), (32, 3, 4, 23), (32, 3, 5, 24)]:
        psis = [[morlet_on_torus(n, j, l, L) for l in range(L)] for j in range(J)]
        f = fixed_map(n, seed)
        s1, s2 = coefficients(f, psis, J, L)
        fixed.append(
            {
                "size": n,
                "scales": J,
                "orientations": L,
                "map_row_major": [float(v) for v in f.ravel()],
                "items": summary(f, s1, s2, J, L),
            }
        )
    n, J, L, count = 64, 4, 4, 400
    psis = [[morlet_on_torus(n, j, l, L) for l in range(L)] for j in range(J)]
    rng = np.random.default_rng(2026)
    rows = []
    for _ in range(count):
        f = rng.standard_normal((n, n))
        s1, s2 = coefficients(f, psis, J, L)
        rows.append(summary(f, s1, s2, J, L))
    names = list(rows[0].keys())
    values = np.array([[r[k] for k in names] for r in rows])
    white = {
        "size": n,
        "scales": J,
        "orientations": L,
        "fields": count,
        "names": names,
        "mean": [float(v) for v in values.mean(axis=0)],
        "standard_error": [float(v) for v in values.std(axis=0, ddof=1) / np.sqrt(count)],
    }
    data = {
        "generator": f"summary_reference.py with numpy {np.__version__}",
        "fixed": fixed,
        "white_noise": white,
    }
    path = os.path.join(out_dir, "summary_reference.json")
    with open(path + ".tmp", "w") as fh:
        json.dump(data, fh)
    os.replace(path + ".tmp", path)
    print("wrote", path)


if __name__ == "__main__":
    main()
