"""Measure an ensemble as a SLURM job array, one shard per array task, from Python.

Submit the measurement as an array and the merge as a job that waits for it:

    jobid=$(sbatch --parsable --array=0-31 --wrap \
        "python slurm_ensemble.py measure --simulate recipe.toml -o ens_fiducial")
    sbatch --dependency=afterok:$jobid --wrap "python slurm_ensemble.py merge ens_fiducial"

Each task measures the shard SLURM_ARRAY_TASK_ID of SLURM_ARRAY_TASK_COUNT (read by the
library itself when no shard is given, as `planisphere ensemble` does); `merge` joins the
rows into the table `planisphere forecast` reads, identical to `planisphere ensemble`'s.
RAYON_NUM_THREADS (or --threads) sets the threads of each task, e.g. to the task's
--cpus-per-task.
"""

from __future__ import annotations

import argparse

import planisphere


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    commands = parser.add_subparsers(dest="command", required=True)
    measure = commands.add_parser("measure", help="measure this array task's shard")
    measure.add_argument("-o", "--output-dir", required=True)
    source = measure.add_mutually_exclusive_group(required=True)
    source.add_argument("--simulate")
    source.add_argument("--maps")
    source.add_argument("--map-list")
    measure.add_argument("--mask")
    measure.add_argument("-J", "--scales", type=int)
    measure.add_argument("-L", "--orientations", type=int)
    measure.add_argument("--tile-pixels", type=int)
    measure.add_argument("--border-pixels", type=int)
    measure.add_argument("--threads", type=int)
    merge = commands.add_parser("merge", help="join the shards into the table")
    merge.add_argument("output_dir")
    args = parser.parse_args()
    if args.command == "merge":
        table = planisphere.merge(args.output_dir)
        print(f"table {table.values.shape[0]} × {table.values.shape[1]} written to "
              f"{args.output_dir}/statistics.npy")
        return
    options = {k: v for k, v in {
        "simulate": args.simulate, "maps": args.maps, "map_list": args.map_list,
        "mask": args.mask, "scales": args.scales, "orientations": args.orientations,
        "tile_pixels": args.tile_pixels, "border_pixels": args.border_pixels,
    }.items() if v is not None}
    planisphere.ensemble(args.output_dir, threads=args.threads, **options)


if __name__ == "__main__":
    main()
