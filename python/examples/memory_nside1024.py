"""Peak memory (maximum resident set size) of measuring one NSIDE 1024 map from Python and
with the command line, side by side in one run; prints a table.

    python memory_nside1024.py [--nside 1024] [--scales 4] [--workdir DIR] [--repeats 1]

Each run is a fresh process whose peak RSS the parent reads with getrusage (RUSAGE_CHILDREN
after waiting for that one child): the command line `planisphere measure MAP.fits --mask
MASK.fits -o out.json`; `python -c` calling `planisphere.measure` with the same settings on
the map and mask as arrays read with `ps.read_map` / `read_mask` (the library reads both
arrays in place, storing beside the mask only the weights its taper changes, while the caller
keeps both arrays), on the map array with the mask's file name, and on the two file names
(the library reads them, as the command line does); then `python -c` reading the two arrays
without measuring, and the imports alone. Every Python figure includes the interpreter and
numpy. The map is a Gaussian sky of the built-in model (`planisphere sky`), the mask the
northern cap above 30° latitude with a C2 taper of 60′.

Measured (one run, side by side; 2 shared cores): command line 307.8 MiB; Python with the map
and mask arrays 288.7 MiB (0.938; 460.7 MiB, 1.340, when the library tapered a copy of the
mask array, and 557.5 MiB, 1.621, when it also copied the map); with the map array and the
mask's file name 288.1 MiB (0.936); with both file names 278.6 MiB (0.905); reading the two
arrays alone 221.3 MiB; the imports alone 26.3 MiB. With both arrays the library adds 67.4 MiB
to what the caller holds, 0.219 of the command line's peak.
"""

from __future__ import annotations

import argparse
import os
import pathlib
import resource
import subprocess
import sys
import tempfile

import numpy as np

REPO = pathlib.Path(__file__).resolve().parents[2]


def peak_rss_of(command: list[str]) -> float:
    """Peak RSS (MiB) of running `command` in a child of a fresh helper process (so the
    reading is that child's alone)."""
    helper = (
        "import resource, subprocess, sys\n"
        f"subprocess.run({command!r}, check=True, stdout=subprocess.DEVNULL)\n"
        "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)\n"
    )
    out = subprocess.run([sys.executable, "-c", helper], check=True, capture_output=True,
                         text=True)
    return int(out.stdout.split()[-1]) / 1024.0  # Linux reports KiB


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nside", type=int, default=1024)
    parser.add_argument("--scales", type=int, default=4)
    parser.add_argument("--workdir")
    parser.add_argument("--repeats", type=int, default=1)
    parser.add_argument("--binary", default=os.environ.get(
        "PLANISPHERE_BIN", str(REPO / "target" / "release" / "planisphere")))
    args = parser.parse_args()
    work = pathlib.Path(args.workdir or tempfile.mkdtemp(prefix="planisphere-memory-"))
    work.mkdir(parents=True, exist_ok=True)
    import planisphere as ps

    sky, mask = work / "sky.fits", work / "mask.fits"
    if not sky.exists():
        subprocess.run([args.binary, "sky", "-o", str(sky), "--nside", str(args.nside),
                        "--seed", "1"], check=True, stdout=subprocess.DEVNULL)
    if not mask.exists():
        npix = 12 * args.nside ** 2
        # the first 3·NSIDE² pixels of the RING order are the rings above z = 1/2, i.e. the
        # cap above 30° latitude (polar cap of 2·NSIDE(NSIDE−1) pixels down to z = 2/3, then
        # NSIDE/4 equatorial rings of 4·NSIDE pixels, Δz = 2/(3·NSIDE) each; Górski et al. 2005)
        cap = np.zeros(npix)
        cap[: npix // 4] = 1.0
        ps.write_map(mask, cap)
    settings = ["-J", str(args.scales)]
    cli = [args.binary, "measure", str(sky), "--mask", str(mask), *settings,
           "-o", str(work / "cli.json")]

    def python(map_code: str, mask_code: str, out: str) -> list[str]:
        return [sys.executable, "-c", (
            "import planisphere as ps\n"
            f"m = {map_code}\n"
            f"w = {mask_code}\n"
            f"r = ps.measure(m, w, scales={args.scales})\n"
            "assert r.copied_maps == [], r.copied_maps\n"
            f"open({str(work / out)!r}, 'w').write(r.to_json())\n"
        )]

    read_sky, read_mask = f"ps.read_map({str(sky)!r})", f"ps.read_mask({str(mask)!r})"
    runs = [
        ("command line `measure MAP --mask MASK`", cli),
        ("Python, map and mask arrays from `ps.read_map` / `ps.read_mask`",
         python(read_sky, read_mask, "arrays.json")),
        ("Python, map array, mask file name", python(read_sky, repr(str(mask)), "map-array.json")),
        ("Python, file names", python(repr(str(sky)), repr(str(mask)), "files.json")),
        ("Python, reading the two arrays only (no measurement)",
         [sys.executable, "-c", f"import planisphere as ps\nm = {read_sky}\nw = {read_mask}\n"]),
        ("Python, `import planisphere, numpy` only",
         [sys.executable, "-c", "import planisphere, numpy"]),
    ]
    peaks = [[peak_rss_of(command) for _, command in runs] for _ in range(args.repeats)]
    print(f"NSIDE {args.nside}, J = {args.scales}, mask f_sky 0.25, files in {work}")
    print("| input | " + " | ".join(f"run {i + 1}: peak RSS | ratio" for i in range(args.repeats))
          + " |")
    print("|---|" + "---|---|" * args.repeats)
    for k, (label, _) in enumerate(runs):
        cells = [f"{run[k]:.1f} MiB | {run[k] / run[0]:.3f}" for run in peaks]
        print(f"| {label} | " + " | ".join(cells) + " |")
    for i, run in enumerate(peaks):
        measured, held = run[1], run[4]
        print(f"run {i + 1}: measuring from arrays adds {measured - held:.1f} MiB to the "
              f"caller's {held:.1f} MiB (interpreter, numpy and the two arrays), "
              f"{(measured - held) / run[0]:.3f} of the command line's {run[0]:.1f} MiB")


if __name__ == "__main__":
    main()
