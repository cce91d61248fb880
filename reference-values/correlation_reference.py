#!/usr/bin/env python3
"""Reference values for planisphere's C_ell <-> xi(theta) transforms, computed with numpy.

Run by hand (not by CI): python3 reference-values/correlation_reference.py
Writes reference-values/correlation/reference.json:
  - Gauss-Legendre nodes and weights from numpy.polynomial.legendre.leggauss for n = 7 and 64;
  - xi(mu) = sum_l (2l+1)/(4 pi) C_l P_l(mu) by numpy.polynomial.legendre.legval for a smooth
    model spectrum C_l = 1e-4 / (1 + (l/30)^2)^1.5 (l = 0..200) at 25 values of mu.
"""
import json
import os
import numpy as np

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "correlation")


def main():
    os.makedirs(OUT, exist_ok=True)
    ref = {"numpy_version": np.__version__}
    for n in (7, 64):
        x, w = np.polynomial.legendre.leggauss(n)
        ref[f"leggauss_{n}"] = {"nodes": x.tolist(), "weights": w.tolist()}
    ell = np.arange(201)
    cl = 1e-4 / (1 + (ell / 30.0) ** 2) ** 1.5
    mu = np.linspace(-1, 1, 25)
    coef = (2 * ell + 1) / (4 * np.pi) * cl
    ref["model_cl"] = cl.tolist()
    ref["mu"] = mu.tolist()
    ref["xi"] = np.polynomial.legendre.legval(mu, coef).tolist()
    with open(os.path.join(OUT, "reference.json"), "w") as f:
        json.dump(ref, f)
    print("wrote", OUT)


if __name__ == "__main__":
    main()
