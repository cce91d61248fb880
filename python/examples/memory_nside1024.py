"""Peak memory (maximum resident set size) of measuring one NSIDE 1024 map from Python and
with the command line, side by side in one run; prints a table.

    python memory_nside1024.py [--nside 1024] [--scales 4] [--workdir DIR] [--repeats 1]

Each measurement runs in a fresh process whose peak RSS the parent reads with getrusage
(RUSAGE_CHILDREN after waiting for that one child): the command line `planisphere measure
MAP.fits --mask MASK.fits -o out.json`, and `python -c` reading the same files with
`planisphere.read_map` / `read_mask` and calling `planisphere.measure` with the same settings
("arrays": the caller holds the map and mask arrays while the library holds its own copy, as
it must: its map owns its values), and `planisphere.measure` given the file names ("file
names": the library reads them, as the command line does). Every Python figure includes the
interpreter and numpy (the last column). The map is a Gaussian sky of the built-in model (`planisphere
sky`), the mask the northern cap above 30° latitude with a C2 taper of 60′.
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
    python = [sys.executable, "-c", (
        "import planisphere as ps\n"
        f"m = ps.read_map({str(sky)!r})\n"
        f"w = ps.read_mask({str(mask)!r})\n"
        f"r = ps.measure(m, w, scales={args.scales})\n"
        f"open({str(work / 'python.json')!r}, 'w').write(r.to_json())\n"
    )]
    files = [sys.executable, "-c", (
        "import planisphere as ps\n"
        f"r = ps.measure({str(sky)!r}, {str(mask)!r}, scales={args.scales})\n"
        f"open({str(work / 'files.json')!r}, 'w').write(r.to_json())\n"
    )]
    baseline = [sys.executable, "-c", "import planisphere, numpy"]
    rows = []
    for _ in range(args.repeats):
        rows.append((peak_rss_of(cli), peak_rss_of(python), peak_rss_of(files),
                     peak_rss_of(baseline)))
    print(f"NSIDE {args.nside}, J = {args.scales}, mask f_sky 0.25, files in {work}")
    print("| run | command line | Python, arrays | ratio | Python, file names | ratio "
          "| Python, imports only |")
    print("|---|---|---|---|---|---|---|")
    for i, (c, p, f, b) in enumerate(rows):
        print(f"| {i + 1} | {c:.1f} MiB | {p:.1f} MiB | {p / c:.3f} | {f:.1f} MiB | {f / c:.3f} "
              f"| {b:.1f} MiB |")


if __name__ == "__main__":
    main()
