"""Measure an ensemble across processes with Dask's distributed scheduler.

Each Dask task measures one shard of the ensemble (`planisphere.ensemble(..., shard=(k, n))`,
the same code as `planisphere ensemble --shard k/n`); the rows land in the ensemble directory,
and `planisphere.merge` joins them into `statistics.npy` + `statistics.json` +
`statistics.csv`: the table `planisphere forecast` reads, identical to the one `planisphere
ensemble` writes in one go. A shard that was already measured is skipped, so a failed run can
simply be started again.

    python dask_ensemble.py --simulate recipe.toml -o ens_fiducial --shards 16 --workers 4
    python dask_ensemble.py --maps 'sims/kappa_*.fits' --mask mask.fits -o ens --shards 64 \
        --scheduler tcp://scheduler:8786

On a cluster, start the workers with dask-jobqueue (e.g. a SLURMCluster scaled to the number
of nodes) and pass its scheduler address; every worker needs this package installed and must
see the ensemble directory (a shared file system).
"""

from __future__ import annotations

import argparse
from typing import Any, Dict, Optional

import planisphere


def measure_shard(index: int, count: int, output_dir: str, options: Dict[str, Any],
                  threads: Optional[int] = 1) -> int:
    """Measures shard `index` of `count` (runs on a Dask worker)."""
    planisphere.ensemble(output_dir, shard=(index, count), threads=threads, **options)
    return index


def measure_ensemble(client: Any, output_dir: str, shards: int,
                     threads_per_shard: Optional[int] = 1, **options: Any) -> planisphere.Table:
    """Measures every shard on the cluster behind `client`, then merges the table.

    `options` are those of `planisphere.ensemble` (maps, map_list or simulate; mask, scales,
    ...)."""
    futures = client.map(measure_shard, range(shards), count=shards,
                         output_dir=str(output_dir), options=options,
                         threads=threads_per_shard, pure=False)
    client.gather(futures)
    return planisphere.merge(output_dir)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-o", "--output-dir", required=True)
    source = parser.add_mutually_exclusive_group(required=True)
    source.add_argument("--simulate", help="simulation recipe (TOML)")
    source.add_argument("--maps", help="glob pattern of map files (quote it)")
    source.add_argument("--map-list", help="file listing the maps, one per line")
    parser.add_argument("--mask")
    parser.add_argument("-J", "--scales", type=int)
    parser.add_argument("-L", "--orientations", type=int)
    parser.add_argument("--tile-pixels", type=int)
    parser.add_argument("--border-pixels", type=int)
    parser.add_argument("--shards", type=int, default=8)
    parser.add_argument("--workers", type=int, default=2,
                        help="processes of the local cluster (ignored with --scheduler)")
    parser.add_argument("--scheduler", help="address of a running Dask scheduler")
    args = parser.parse_args()

    from dask.distributed import Client, LocalCluster

    options = {k: v for k, v in {
        "simulate": args.simulate, "maps": args.maps, "map_list": args.map_list,
        "mask": args.mask, "scales": args.scales, "orientations": args.orientations,
        "tile_pixels": args.tile_pixels, "border_pixels": args.border_pixels,
    }.items() if v is not None}
    if args.scheduler:
        client = Client(args.scheduler)
    else:
        client = Client(LocalCluster(n_workers=args.workers, threads_per_worker=1))
    with client:
        table = measure_ensemble(client, args.output_dir, args.shards, **options)
    print(f"table {table.values.shape[0]} × {table.values.shape[1]} written to "
          f"{args.output_dir}/statistics.npy")


if __name__ == "__main__":
    main()
