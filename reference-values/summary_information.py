#!/usr/bin/env python3
"""Information of the orientation-harmonic summary against the previous reduced set, on the
demo's ensembles, with a bootstrap of the ratio of their marginalised errors on the amplitude.

Run by hand (not by CI), after `planisphere demo -o DIR ...`:

    python3 reference-values/summary_information.py --run NAME=DIR [--run NAME2=DIR2 ...]
        [--draws 1000] [--seed 20261205] [--output reference-values/summary/information.json]

numpy only. For each demo output directory DIR (fiducial/, amplitude_plus/, amplitude_minus/,
shift_plus/, shift_minus/, each with statistics.json + statistics.npy, and comparison.csv):

(a) the summary items are recomputed from the full labelled coefficients of every sky of every
    ensemble with the formulas of src/scattering/statistics.rs (complex exponentials here):
      h_m(j) = sum_l S1(j,l) exp(-2 pi i m l / L),  T(j1,j2,D) = sum_l1 S2(j1,l1,j2,(l1+D) mod L)
      modulus_j = h_0(j)/L, modulus_anisotropy_j = |h_1(j)|/h_0(j),
      intermittency_j1_j2 = sum_D T/(L h_0(j1)), alignment_j1_j2 = Re sum_D T e^{2 pi i D/L}/sum_D T,
      mean, rms = sqrt(variance)
    and compared with the demo's own summary columns (largest relative difference recorded);
(b) the previous reduced set of the same count (J^2), kept here only for this comparison:
      per scale j: mean_l S1(j,l);
      per pair j1<j2: mean over (l1,l2) of S2(j1,l1,j2,l2)/S1(j1,l1);
      per pair j1<j2: sum_l1 S2(j1,l1,j2,l1) / sum_l1 S2(j1,l1,j2,l1+L/2);
(c) the marginalised error on the amplitude A of both sets with the crate's recipe
    (src/forecast/): unbiased sample covariance of the fiducial skies (divisor n-1), precision
    h C^{-1} with the Hartlap factor h = (n-p-2)/(n-1) (Hartlap, Simon & Schneider 2007, A&A 464,
    399, eq. 17), paired central differences mu_,a = mean_i(x+_i - x-_i)/(2 Delta_a) (row i of the
    + and - sets share a seed), F = M^T Psi M, sigma(A) = sqrt((F^{-1})_AA). The summary row is
    checked against the crate's value in DIR/comparison.csv;
(d) a bootstrap: each draw resamples the fiducial skies and the derivative seeds with
    replacement (one seed draw for all four shifted ensembles, which share seeds), and the same
    draw serves both sets; the ratio sigma_new/sigma_old is summarised by its median, 16/84 and
    2.5/97.5 percentiles and the fraction of draws with sigma_new <= sigma_old. Draws that
    resample only the fiducial skies, or only the derivative seeds, show which ensemble the
    scatter comes from. (Repeated skies shrink a bootstrap sample's effective size, so the
    single sigma values of the draws are biased low; the ratio of two sets on the same draw is
    what is summarised.)

Besides the two sets, measured the same way on the same draws: the summary row with the modulus
anisotropies as well (J^2 + J numbers), and two re-normalisations of the summary's own items
(variants): logarithms of the intermittencies, and intermittencies as means of per-orientation
ratios (sums of ratios) instead of ratios of orientation sums.

With --fixture-run NAME, that run's summary items (every sky of the five ensembles), the steps
and numpy's marginalised errors of the summary row are written to
summary/demo_summary_row.json for tests/forecast_demo_summary_numpy.rs.
"""

import argparse
import csv
import json
import os
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ENSEMBLES = ["fiducial", "amplitude_plus", "amplitude_minus", "shift_plus", "shift_minus"]
SUMMARY_ROW = "orientation-harmonic summary"
SUMMARY_ROW_PREFIXES = ("summary.modulus_j", "summary.intermittency_", "summary.alignment_")


def load_ensemble(path):
    with open(os.path.join(path, "statistics.json")) as fh:
        meta = json.load(fh)
    values = np.load(os.path.join(path, meta["array"]))
    members = [m["source"]["simulation"] for m in meta["members"]]
    if members != list(range(len(members))):
        raise SystemExit(f"{path}: members are not simulations 0..n-1 in order")
    return meta["columns"], values, meta["settings"]


def demo_steps(settings, fiducial_amplitude):
    """Half steps of (amplitude, shift) from the ensembles' sky recipes: the shift is the
    recipe's lognormal shift, the amplitude scales the recipe's spectrum."""
    rec = {e: settings[e]["recipe"] for e in ENSEMBLES}
    cl = {e: np.sum(rec[e]["spectrum"]["cl"]) for e in ENSEMBLES}
    amplitude = fiducial_amplitude * (cl["amplitude_plus"] - cl["amplitude_minus"]) / (2.0 * cl["fiducial"])
    shift = (rec["shift_plus"]["lognormal_shift"] - rec["shift_minus"]["lognormal_shift"]) / 2.0
    return [float(amplitude), float(shift)]


class Coefficients:
    """Full labelled coefficients of an ensemble as arrays S1[n, J, L], S2[n, J, L, J, L]."""

    def __init__(self, columns, values, J, L):
        index = {c: i for i, c in enumerate(columns)}
        n = len(values)
        self.J, self.L = J, L
        self.mean = values[:, index["full.mean"]]
        self.variance = values[:, index["full.variance"]]
        self.s1 = np.empty((n, J, L))
        for j in range(J):
            for l in range(L):
                self.s1[:, j, l] = values[:, index[f"full.S1_j{j}_l{l}"]]
        self.s2 = np.full((n, J, L, J, L), np.nan)
        for j1 in range(J):
            for l1 in range(L):
                for j2 in range(j1 + 1, J):
                    for l2 in range(L):
                        self.s2[:, j1, l1, j2, l2] = values[:, index[f"full.S2_j{j1}_l{l1}_j{j2}_l{l2}"]]

    def pairs(self):
        return [(j1, j2) for j1 in range(self.J) for j2 in range(j1 + 1, self.J)]

    def relative(self, j1, j2):
        """T[n, D] = sum_l1 S2(j1, l1, j2, (l1 + D) mod L)."""
        L = self.L
        return np.stack(
            [sum(self.s2[:, j1, l1, j2, (l1 + d) % L] for l1 in range(L)) for d in range(L)], axis=1
        )


def summary_items(c):
    """All summary items (name -> values over skies), formulas of src/scattering/statistics.rs."""
    J, L = c.J, c.L
    ls = np.arange(L)
    out = {"summary.mean": c.mean, "summary.rms": np.sqrt(np.maximum(c.variance, 0.0))}
    h0 = c.s1.sum(axis=2)
    h1 = (c.s1 * np.exp(-2j * np.pi * ls / L)).sum(axis=2)
    for j in range(J):
        out[f"summary.modulus_j{j}"] = h0[:, j] / L
    for j in range(J):
        out[f"summary.modulus_anisotropy_j{j}"] = np.abs(h1[:, j]) / h0[:, j]
    for j1, j2 in c.pairs():
        t = c.relative(j1, j2)
        out[f"summary.intermittency_j{j1}_j{j2}"] = t.sum(axis=1) / (L * h0[:, j1])
    for j1, j2 in c.pairs():
        t = c.relative(j1, j2)
        out[f"summary.alignment_j{j1}_j{j2}"] = (t * np.exp(2j * np.pi * ls / L)).real.sum(axis=1) / t.sum(axis=1)
    return out


def summary_row(c):
    """The forecast row: moduli, intermittencies, alignments (J^2 numbers)."""
    items = summary_items(c)
    names = [k for k in items if k.startswith(SUMMARY_ROW_PREFIXES)]
    return names, np.stack([items[k] for k in names], axis=1)


def previous_reduced_set(c):
    """The previous reduced set of J^2 numbers (see the module documentation)."""
    J, L = c.J, c.L
    if L % 2:
        raise SystemExit("the previous reduced set needs an even number of orientations")
    names, cols = [], []
    for j in range(J):
        names.append(f"previous.order1_mean_j{j}")
        cols.append(c.s1[:, j, :].mean(axis=1))
    for j1, j2 in c.pairs():
        names.append(f"previous.ratio_mean_j{j1}_j{j2}")
        cols.append((c.s2[:, j1, :, j2, :] / c.s1[:, j1, :, None]).mean(axis=(1, 2)))
    for j1, j2 in c.pairs():
        par = sum(c.s2[:, j1, l1, j2, l1] for l1 in range(L))
        perp = sum(c.s2[:, j1, l1, j2, (l1 + L // 2) % L] for l1 in range(L))
        names.append(f"previous.parallel_over_perpendicular_j{j1}_j{j2}")
        cols.append(par / perp)
    return names, np.stack(cols, axis=1)


def summary_row_with_anisotropies(c):
    """The forecast row plus the modulus anisotropies (J^2 + J numbers)."""
    items = summary_items(c)
    names = [k for k in items if k.startswith(SUMMARY_ROW_PREFIXES + ("summary.modulus_anisotropy_",))]
    return names, np.stack([items[k] for k in names], axis=1)


def variant_log_intermittency(c):
    names, x = summary_row(c)
    x = x.copy()
    for k, name in enumerate(names):
        if name.startswith("summary.intermittency_"):
            x[:, k] = np.log(x[:, k])
    return names, x


def variant_sum_of_ratios(c):
    names, x = summary_row(c)
    x = x.copy()
    L = c.L
    for k, name in enumerate(names):
        if name.startswith("summary.intermittency_"):
            j1, j2 = (int(p[1:]) for p in name.split("_")[1:3])
            # sum_D T / (L h_0) with h_0 = L * mean S1  ->  mean over l1 of (sum_l2 S2)/(L S1(j1,l1))
            x[:, k] = (c.s2[:, j1, :, j2, :].sum(axis=2) / (L * c.s1[:, j1, :])).mean(axis=1)
    return names, x


# ---------------------------------------------------------------- forecast (src/forecast/)


def sample_covariance(x):
    mean = x.mean(axis=0)
    d = x - mean
    cov = d.T @ d / (len(x) - 1)
    return 0.5 * (cov + cov.T)


def spd_inverse(a):
    """Inverse through the unit-diagonal scaling, as src/forecast/covariance.rs."""
    s = 1.0 / np.sqrt(np.diag(a))
    r = a * np.outer(s, s)
    np.fill_diagonal(r, 1.0)
    inv = np.linalg.inv(r) * np.outer(s, s)
    return 0.5 * (inv + inv.T)


def marginalised_errors(fid, plus_minus, steps):
    """Marginalised errors sqrt(diag(F^-1)) of (amplitude, shift) and the Hartlap factor."""
    n, p = len(fid), len(fid[0])
    hartlap = (n - p - 2) / (n - 1)
    psi = hartlap * spd_inverse(sample_covariance(fid))
    m = np.stack([(xp - xm).mean(axis=0) / (2.0 * step) for (xp, xm), step in zip(plus_minus, steps)], axis=1)
    f = m.T @ psi @ m
    f = 0.5 * (f + f.T)
    return np.sqrt(np.diag(spd_inverse(f))), hartlap


def sigma_amplitude(fid, plus_minus, steps):
    """Marginalised error of the first parameter (the amplitude)."""
    errors, hartlap = marginalised_errors(fid, plus_minus, steps)
    return float(errors[0]), hartlap


def percentiles(v):
    q = np.percentile(v, [2.5, 16, 50, 84, 97.5])
    return {"p2.5": q[0], "p16": q[1], "median": q[2], "p84": q[3], "p97.5": q[4]}


def crate_rows(run_dir):
    """sigma(A) and Hartlap factor of every row of the demo's comparison table."""
    with open(os.path.join(run_dir, "comparison.csv"), newline="") as fh:
        return {
            r["set"]: {"sigma_amplitude": float(r["sigma_marg(amplitude)"]), "hartlap_factor": float(r["hartlap"]),
                       "n_statistics": int(r["p"])}
            for r in csv.DictReader(fh)
            if r["sigma_marg(amplitude)"]
        }


def analyse(name, run_dir, draws, seed):
    data, settings = {}, {}
    for e in ENSEMBLES:
        columns, values, settings[e] = load_ensemble(os.path.join(run_dir, e))
        data[e] = (columns, values)
    measurement = settings["fiducial"]["measurement"]
    J, L = measurement["scales"], measurement["orientations"]
    with open(os.path.join(run_dir, "forecast.json")) as fh:
        forecast = json.load(fh)
    if forecast["parameters"] != ["amplitude", "shift"]:
        raise SystemExit(f"{run_dir}: expected the demo's parameters (amplitude, shift)")
    steps = demo_steps(settings, forecast["fiducial"][0])
    coeffs = {e: Coefficients(*data[e], J, L) for e in ENSEMBLES}

    # (a) summary items from the full coefficients against the demo's own summary columns
    worst = 0.0
    worst_item = None
    for e in ENSEMBLES:
        columns, values = data[e]
        index = {c: i for i, c in enumerate(columns)}
        for item, v in summary_items(coeffs[e]).items():
            demo = values[:, index[item]]
            scale = max(np.max(np.abs(demo)), 1e-300)
            rel = float(np.max(np.abs(v - demo)) / scale)
            if rel > worst:
                worst, worst_item = rel, f"{e}/{item}"
    summary_names = summary_row(coeffs["fiducial"])[0]

    sets = {
        "orientation_harmonic_summary": summary_row,
        "previous_reduced_set": previous_reduced_set,
        "variant_log_intermittency": variant_log_intermittency,
        "variant_intermittency_sum_of_ratios": variant_sum_of_ratios,
        "summary_with_anisotropies": summary_row_with_anisotropies,
    }
    x = {s: {e: f(coeffs[e])[1] for e in ENSEMBLES} for s, f in sets.items()}

    def sigma(s, fi=None, di=None):
        fid = x[s]["fiducial"] if fi is None else x[s]["fiducial"][fi]
        pm = []
        for par in ("amplitude", "shift"):
            xp, xm = x[s][f"{par}_plus"], x[s][f"{par}_minus"]
            if di is not None:
                xp, xm = xp[di], xm[di]
            pm.append((xp, xm))
        return sigma_amplitude(fid, pm, steps)

    point = {s: sigma(s) for s in sets}
    table = crate_rows(run_dir)
    crate = table.get(SUMMARY_ROW, {}).get("sigma_amplitude")
    ours = point["orientation_harmonic_summary"][0]

    nf = len(x["orientation_harmonic_summary"]["fiducial"])
    nd = len(x["orientation_harmonic_summary"]["amplitude_plus"])
    rng = np.random.default_rng(seed)
    modes = {"both": (True, True), "fiducial_only": (True, False), "derivatives_only": (False, True)}
    boot = {}
    for mode, (rf, rd) in modes.items():
        sig = {s: np.empty(draws) for s in sets}
        for b in range(draws):
            fi = rng.integers(0, nf, nf) if rf else None
            di = rng.integers(0, nd, nd) if rd else None
            for s in sets:
                sig[s][b] = sigma(s, fi, di)[0]
        old = sig["previous_reduced_set"]
        entry = {}
        for s in sets:
            if s == "previous_reduced_set":
                continue
            ratio = sig[s] / old
            entry[s] = {
                "ratio_to_previous": percentiles(ratio),
                "fraction_not_worse": float(np.mean(sig[s] <= old)),
            }
        entry["sigma_draws"] = {s: percentiles(sig[s]) for s in sets}
        boot[mode] = entry

    fixture = {
        "run": name,
        "steps": steps,
        "parameters": ["amplitude", "shift"],
        "columns": [k for k in summary_items(coeffs["fiducial"])],
        "ensembles": {
            e: np.stack(list(summary_items(coeffs[e]).values()), axis=1).tolist() for e in ENSEMBLES
        },
        "summary_row": summary_names,
        "marginalised_errors": marginalised_errors(
            x["orientation_harmonic_summary"]["fiducial"],
            [(x["orientation_harmonic_summary"][f"{p}_plus"], x["orientation_harmonic_summary"][f"{p}_minus"])
             for p in ("amplitude", "shift")],
            steps,
        )[0].tolist(),
        "hartlap_factor": point["orientation_harmonic_summary"][1],
    }

    return fixture, {
        "run": name,
        "steps": steps,
        "directory": os.path.abspath(run_dir),
        "demo_settings": forecast.get("settings"),
        "demo_command": "planisphere demo -o {} --nside {} --fiducial-count {} --derivative-count {} --scales {}".format(
            run_dir, forecast["settings"]["nside"], forecast["settings"]["fiducial_count"],
            forecast["settings"]["derivative_count"], J),
        "fiducial_skies": nf,
        "skies_per_shifted_value": nd,
        "scales": J,
        "orientations": L,
        "summary_row_items": summary_names,
        "summary_items_from_full_set_worst_relative_difference": worst,
        "summary_items_worst_item": worst_item,
        "sigma_amplitude": {s: v[0] for s, v in point.items()},
        "hartlap_factor": {s: v[1] for s, v in point.items()},
        "n_statistics": {s: len(x[s]["fiducial"][0]) for s in sets},
        "ratio_summary_to_previous": ours / point["previous_reduced_set"][0],
        "crate_sigma_amplitude_summary_row": crate,
        "crate_comparison_rows": table,
        "script_vs_crate_relative_difference": None if crate is None else abs(ours - crate) / crate,
        "bootstrap": {"draws": draws, "seed": seed, **boot},
    }


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--run", action="append", required=True, metavar="NAME=DIR")
    ap.add_argument("--draws", type=int, default=1000)
    ap.add_argument("--seed", type=int, default=20261205)
    ap.add_argument("--output", default=os.path.join(HERE, "summary", "information.json"))
    ap.add_argument("--fixture-run", metavar="NAME",
                    help="write this run's summary items and numpy errors for tests/forecast_demo_summary_numpy.rs")
    ap.add_argument("--fixture", default=os.path.join(HERE, "summary", "demo_summary_row.json"))
    args = ap.parse_args()
    runs = []
    for spec in args.run:
        name, _, path = spec.partition("=")
        if not path:
            raise SystemExit(f"--run expects NAME=DIR, got '{spec}'")
        fixture, r = analyse(name, path, args.draws, args.seed)
        runs.append(r)
        if name == args.fixture_run:
            fixture["numpy_version"] = np.__version__
            fixture["source"] = "reference-values/summary_information.py"
            with open(args.fixture, "w") as fh:
                json.dump(fixture, fh)
                fh.write("\n")
        b = r["bootstrap"]["both"]["orientation_harmonic_summary"]
        print(
            f"{name}: n_fid={r['fiducial_skies']} n_d={r['skies_per_shifted_value']} "
            f"sigma(A) summary={r['sigma_amplitude']['orientation_harmonic_summary']:.5e} "
            f"(crate {r['crate_sigma_amplitude_summary_row']}, rel diff "
            f"{r['script_vs_crate_relative_difference']:.2e}) "
            f"previous={r['sigma_amplitude']['previous_reduced_set']:.5e} "
            f"ratio={r['ratio_summary_to_previous']:.4f} "
            f"bootstrap median {b['ratio_to_previous']['median']:.4f} "
            f"68% [{b['ratio_to_previous']['p16']:.4f}, {b['ratio_to_previous']['p84']:.4f}] "
            f"95% [{b['ratio_to_previous']['p2.5']:.4f}, {b['ratio_to_previous']['p97.5']:.4f}] "
            f"not worse in {b['fraction_not_worse']:.3f}; "
            f"summary items worst rel diff {r['summary_items_from_full_set_worst_relative_difference']:.2e}",
            flush=True,
        )
    out = {
        "script": "reference-values/summary_information.py",
        "command": "python3 " + " ".join(
            [os.path.relpath(sys.argv[0], os.path.dirname(HERE))] + sys.argv[1:]
        ),
        "numpy_version": np.__version__,
        "python_version": sys.version.split()[0],
        "runs": runs,
    }
    os.makedirs(os.path.dirname(os.path.abspath(args.output)), exist_ok=True)
    with open(args.output, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
