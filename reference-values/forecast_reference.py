#!/usr/bin/env python3
"""Reference values for planisphere's forecast tests, computed with numpy and scipy.

Run by hand (not by CI):  python3 reference-values/forecast_reference.py
Writes reference-values/forecast/forecast_reference.json. Input data are stored in the file
itself (exact decimal round trip of float64), so the Rust tests need no random generator.

Contents:
- "covariance": a 40 x 6 data matrix with correlated columns and, from numpy, its mean,
  np.cov (divisor n - 1), np.corrcoef, and the Hartlap-corrected precision
  (n - p - 2)/(n - 1) * np.linalg.inv(cov) (Hartlap, Simon & Schneider 2007, A&A 464, 399, eq. 17).
- "ellipses": 2 x 2 parameter covariances; semi-axes from np.linalg.eigh (square roots of the
  eigenvalues) and the angle of the major-axis eigenvector from the x axis, folded into
  (-pi/2, pi/2]. These are computed independently of Coe 2009's closed forms.
- "fisher": a 3 x 3 Fisher matrix with marginalised errors sqrt(diag(inv(F))), conditional
  errors 1/sqrt(diag(F)) and the parameter correlation.
- "chi2_scales": sqrt(scipy.stats.chi2.ppf(P, 2)) for P = 0.683, 0.954, 0.9973.
"""
import json
import os

import numpy as np
import scipy
from scipy import stats

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "forecast")


def covariance_case():
    rng = np.random.default_rng(20070417)
    n, p = 40, 6
    mix = np.array([[1.0, 0.3, 0.0, 0.0, 0.2, 0.0],
                    [0.0, 2.0, 0.5, 0.0, 0.0, 0.0],
                    [0.0, 0.0, 0.1, 0.05, 0.0, 0.0],
                    [0.0, 0.0, 0.0, 30.0, 10.0, 0.0],
                    [0.0, 0.0, 0.0, 0.0, 1.0, -0.7],
                    [0.0, 0.0, 0.0, 0.0, 0.0, 0.4]])
    data = rng.standard_normal((n, p)) @ mix + np.array([1.0, -2.0, 0.5, 100.0, 0.0, 3.0])
    cov = np.cov(data, rowvar=False, ddof=1)
    hartlap = (n - p - 2) / (n - 1)
    return {
        "n": n,
        "p": p,
        "data": data.tolist(),
        "mean": data.mean(axis=0).tolist(),
        "covariance": cov.tolist(),
        "correlation": np.corrcoef(data, rowvar=False).tolist(),
        "hartlap_factor": hartlap,
        "precision": (hartlap * np.linalg.inv(cov)).tolist(),
    }


def ellipse(sxx, syy, sxy):
    c = np.array([[sxx, sxy], [sxy, syy]])
    w, v = np.linalg.eigh(c)  # ascending eigenvalues
    major = v[:, 1]
    angle = np.arctan2(major[1], major[0])
    if angle <= -np.pi / 2:
        angle += np.pi
    elif angle > np.pi / 2:
        angle -= np.pi
    return {"var_x": sxx, "var_y": syy, "cov_xy": sxy,
            "semi_major": float(np.sqrt(w[1])), "semi_minor": float(np.sqrt(w[0])),
            "angle": float(angle)}


def fisher_case():
    f = np.array([[40.0, -12.0, 3.0], [-12.0, 9.0, 1.5], [3.0, 1.5, 2.0]])
    inv = np.linalg.inv(f)
    marg = np.sqrt(np.diag(inv))
    return {"fisher": f.tolist(), "marginalised_errors": marg.tolist(),
            "conditional_errors": (1.0 / np.sqrt(np.diag(f))).tolist(),
            "parameter_correlation": (inv / np.outer(marg, marg)).tolist()}


def main():
    os.makedirs(OUT, exist_ok=True)
    out = {
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "covariance": covariance_case(),
        "ellipses": [ellipse(4.0, 1.0, 1.2), ellipse(0.5, 2.0, -0.6),
                     ellipse(1.0, 3.0, 0.0), ellipse(2.5e-3, 1.0e-3, 1.4e-3)],
        "fisher": fisher_case(),
        "chi2_scales": [{"probability": q, "scale": float(np.sqrt(stats.chi2.ppf(q, 2)))}
                        for q in (0.683, 0.954, 0.9973)],
    }
    with open(os.path.join(OUT, "forecast_reference.json"), "w") as fh:
        json.dump(out, fh, indent=1)


if __name__ == "__main__":
    main()
