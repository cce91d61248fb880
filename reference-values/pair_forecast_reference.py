#!/usr/bin/env python3
"""Joint auto + cross Fisher errors of an ensemble of map pairs, recomputed with numpy from the
tables planisphere writes, for tests/ensemble_pairs.rs.

Run by hand (not by CI), after making the five pair ensembles from the recipes in
reference-values/pair_forecast/ (NSIDE 16, Gaussian skies with a 300' beam and white noise,
map B correlated with map A at r = 0.6 and its own noise; about 15 s):

    B=target/release/planisphere; R=reference-values/pair_forecast; D=/tmp/pair_forecast; mkdir -p $D
    for e in fiducial A_plus A_minus beam_plus beam_minus; do
        $B ensemble -o $D/$e --simulate $R/$e.toml -J 2 --tile-pixels 16 --border-pixels 2 \\
            --quiet --no-bispectrum
    done
    python3 reference-values/pair_forecast_reference.py $D

It reads each ensemble's statistics.npy and statistics.json (column names), copies the five
tables to reference-values/pair_forecast/<name>.npy (the inputs of the numbers below, so the
Rust test can check both its own tables and the forecast from these ones) and writes
reference-values/pair_forecast/pair_forecast_reference.json.

The forecast recipe is implemented here from its textbook form, not from planisphere's code:

- statistic sets by column-name prefix: for each family (name, own prefixes, cross prefixes)
  the sets "[A]" (a.<own>), "[B]" (b.<own>), "[cross]" (cross.<cross>) and "[A+B+cross]" (all
  three; "[A+B]" when the family has no cross prefix);
- covariance: np.cov of the fiducial table's columns (divisor n - 1); precision
  h * inv(C) with the Hartlap factor h = (n - p - 2)/(n - 1) (Hartlap, Simon & Schneider 2007,
  A&A 464, 399, eq. 17);
- derivatives from seed-paired ensembles: mean over pairs of (x+ - x-)/(2 step);
- Fisher matrix F_ab = d_a^T Psi d_b (Tegmark, Taylor & Heavens 1997, ApJ 480, 22, eq. 15 with
  a parameter-independent covariance); marginalised errors sqrt(diag(inv(F))), conditional
  1/sqrt(diag(F)).

Also checked here, and recorded: the uncorrected Fisher information of a superset of columns is
never smaller (F_joint - F_subset is positive semi-definite for any positive-definite
covariance: common practice, "information adds"), so sigma * sqrt(h) of the joint set is at
most that of every single set.
"""
import json
import os
import shutil
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "pair_forecast")

ENSEMBLES = ["fiducial", "A_plus", "A_minus", "beam_plus", "beam_minus"]
PARAMETERS = [("A", 1e-5, "A_plus", "A_minus"), ("beam", 30.0, "beam_plus", "beam_minus")]

SUMMARY = ["summary.modulus_j", "summary.intermittency_", "summary.alignment_"]
FAMILIES = [
    ("power spectrum (pseudo-C_l)", ["cl."], ["cl."]),
    ("tile power spectrum", ["tile_power."], []),
    ("band powers", ["full.bandpower_"], ["cross_bandpower_"]),
    ("scattering order 1", ["full.S1_"], ["cross_bandpower_", "cross_envelope1_"]),
    ("scattering orders 1+2", ["full.S1_", "full.S2_"],
     ["cross_bandpower_", "cross_envelope1_", "cross_envelope2_"]),
    ("orientation-harmonic summary", SUMMARY, []),
    ("bispectrum", ["bispectrum."], []),
]


def sets(columns):
    out = []
    for name, own, cross in FAMILIES:
        a = ["a." + p for p in own]
        b = ["b." + p for p in own]
        c = ["cross." + p for p in cross]
        parts = [(f"{name} [A]", a), (f"{name} [B]", b)]
        if c:
            parts += [(f"{name} [cross]", c), (f"{name} [A+B+cross]", a + b + c)]
        else:
            parts += [(f"{name} [A+B]", a + b)]
        for set_name, prefixes in parts:
            idx = [j for j, col in enumerate(columns) if any(col.startswith(p) for p in prefixes)]
            if idx:
                out.append((set_name, idx))
    return out


def main():
    if len(sys.argv) != 2:
        sys.exit(__doc__)
    root = sys.argv[1]
    tables, columns = {}, None
    for e in ENSEMBLES:
        tables[e] = np.load(os.path.join(root, e, "statistics.npy"))
        with open(os.path.join(root, e, "statistics.json")) as f:
            cols = json.load(f)["columns"]
        if columns is None:
            columns = cols
        assert cols == columns, f"{e}: other columns"
    os.makedirs(OUT, exist_ok=True)
    for e in ENSEMBLES:
        shutil.copyfile(os.path.join(root, e, "statistics.npy"), os.path.join(OUT, f"{e}.npy"))

    fid = tables["fiducial"]
    n = fid.shape[0]
    derivs = []
    for name, step, plus, minus in PARAMETERS:
        derivs.append((tables[plus] - tables[minus]).mean(axis=0) / (2.0 * step))
    derivs = np.array(derivs)  # k x P

    results = []
    for set_name, idx in sets(columns):
        p = len(idx)
        if n <= p + 2:
            results.append({"name": set_name, "statistics": p, "hartlap_factor": None,
                            "marginalised_errors": None, "conditional_errors": None})
            continue
        cov = np.cov(fid[:, idx], rowvar=False, ddof=1)
        h = (n - p - 2) / (n - 1)
        psi = h * np.linalg.inv(cov)
        d = derivs[:, idx]
        fisher = d @ psi @ d.T
        fisher = 0.5 * (fisher + fisher.T)
        marg = np.sqrt(np.diag(np.linalg.inv(fisher)))
        cond = 1.0 / np.sqrt(np.diag(fisher))
        results.append({
            "name": set_name,
            "statistics": p,
            "hartlap_factor": h,
            "marginalised_errors": [repr(float(x)) for x in marg],
            "conditional_errors": [repr(float(x)) for x in cond],
        })

    # information adds: sigma * sqrt(h) of a joint set never exceeds a subset's
    by_name = {r["name"]: r for r in results}
    adds = []
    for name, own, cross in FAMILIES:
        joint = by_name.get(f"{name} [A+B+cross]") or by_name.get(f"{name} [A+B]")
        if joint is None or joint["marginalised_errors"] is None:
            continue
        for part in ["A", "B", "cross"]:
            single = by_name.get(f"{name} [{part}]")
            if single is None or single["marginalised_errors"] is None:
                continue
            for k in range(len(PARAMETERS)):
                sj = float(joint["marginalised_errors"][k]) * np.sqrt(joint["hartlap_factor"])
                ss = float(single["marginalised_errors"][k]) * np.sqrt(single["hartlap_factor"])
                adds.append(sj <= ss * (1 + 1e-12))
    doc = {
        "source": "reference-values/pair_forecast_reference.py",
        "numpy": np.__version__,
        "python": sys.version.split()[0],
        "parameters": [p[0] for p in PARAMETERS],
        "steps": [p[1] for p in PARAMETERS],
        "columns": columns,
        "fiducial_simulations": int(n),
        "tables": {e: f"{e}.npy" for e in ENSEMBLES},
        "uncorrected_information_adds": bool(all(adds)),
        "sets": results,
    }
    with open(os.path.join(OUT, "pair_forecast_reference.json"), "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    print(f"{len(results)} sets; information adds in all {len(adds)} comparisons: {all(adds)}")


if __name__ == "__main__":
    main()
