"""Flat fields for `planisphere measure FIELD.npy --pixel-arcmin A`, with their periodic
scattering coefficients from the independent numpy implementation of scattering_reference.py
(pixel-space Morlet filters wrapped on the torus, numpy FFT circular convolution, plain means).

Each case writes flat_measure/<name>.npy (numpy's own .npy writer; float64, or float32 to check
that reader) and flat_measure/<name>.json (the coefficients computed from exactly the values
stored in the .npy, the float32 ones widened to float64). Sizes include 48 = 3·16, a tile size
that is not a power of two. The numpy version is recorded in the JSON.

Run by hand (not by CI): python3 reference-values/flat_measure_reference.py
"""

import json
import os

import numpy as np

from scattering_reference import circular_convolve, morlet_on_torus


def field(n, seed):
    # the recipe of scattering_reference.py: a smoothed Gaussian field plus point sources
    rng = np.random.default_rng(seed)
    white = rng.standard_normal((n, n))
    k = np.fft.fftfreq(n) * 2 * np.pi
    KX, KY = np.meshgrid(k, k, indexing="xy")
    f = np.real(np.fft.ifft2(np.fft.fft2(white) / (1 + (KX**2 + KY**2) / 0.5)))
    for _ in range(5):
        iy, ix = rng.integers(0, n, 2)
        f[iy, ix] += 3.0
    return f


def coefficients(f, J, L):
    n = f.shape[0]
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
    return {
        "mean": float(f.mean()),
        "variance": float(f.var()),
        "first_order": s1,
        "band_power": p,
        "second_order": s2,
    }


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    out_dir = os.path.join(here, "flat_measure")
    os.makedirs(out_dir, exist_ok=True)
    for (n, J, L, seed, dtype, arcmin) in [
        (48, 4, 4, 21, "float64", 2.0),
        (64, 5, 3, 22, "float32", 0.75),
    ]:
        f = field(n, seed).astype(dtype)
        name = f"field_n{n}_J{J}_L{L}_{dtype}"
        np.save(os.path.join(out_dir, name + ".npy"), f)
        data = coefficients(f.astype(np.float64), J, L)
        data.update(
            size=n,
            scales=J,
            orientations=L,
            seed=seed,
            dtype=dtype,
            pixel_arcmin=arcmin,
            generator=f"flat_measure_reference.py with numpy {np.__version__}",
        )
        with open(os.path.join(out_dir, name + ".json"), "w") as fh:
            json.dump(data, fh)
        print("wrote", name)


if __name__ == "__main__":
    main()
