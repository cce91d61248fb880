"""The Dask and SLURM-array examples produce the table `forecast` reads, identical byte for
byte to the one `planisphere ensemble` writes. Source of the expectation: the command line of
this checkout on the same recipe and settings."""

import importlib.util
import os
import pathlib
import subprocess
import sys

import pytest

EXAMPLES = pathlib.Path(__file__).resolve().parents[1] / "examples"
SETTINGS = {"scales": 2, "orientations": 4, "tile_pixels": 32, "border_pixels": 4}
FLAGS = ["-J", 2, "-L", 4, "--tile-pixels", 32, "--border-pixels", 4, "--quiet"]


def load_example(name):
    spec = importlib.util.spec_from_file_location(name, EXAMPLES / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def reference(tmp_path_factory, cli):
    d = tmp_path_factory.mktemp("ensemble")
    recipe = d / "recipe.toml"
    recipe.write_text("nside = 32\ncount = 7\nseed = 5\nlognormal_shift = 0.02\n")
    cli("ensemble", "--simulate", recipe, "-o", d / "cli", *FLAGS)
    return d, recipe


def same_table(a, b):
    for name in ("statistics.npy", "statistics.json", "statistics.csv"):
        assert (a / name).read_bytes() == (b / name).read_bytes(), name


def test_dask_local_cluster_ensemble_equals_command_line_table(reference):
    distributed = pytest.importorskip("dask.distributed")  # dask 2026.8
    d, recipe = reference
    example = load_example("dask_ensemble")
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address=None)
    with distributed.Client(cluster) as client:
        table = example.measure_ensemble(client, str(d / "dask"), 3, simulate=str(recipe),
                                         **SETTINGS)
    cluster.close()
    assert table.values.shape[0] == 7
    same_table(d / "dask", d / "cli")


def test_slurm_array_example_equals_command_line_table(reference):
    d, recipe = reference
    out = d / "slurm"
    script = str(EXAMPLES / "slurm_ensemble.py")
    flags = ["--simulate", str(recipe), "-o", str(out), "-J", "2", "-L", "4",
             "--tile-pixels", "32", "--border-pixels", "4", "--threads", "1"]
    for task in range(2):
        env = dict(os.environ, SLURM_ARRAY_TASK_ID=str(task), SLURM_ARRAY_TASK_COUNT="2")
        subprocess.run([sys.executable, script, "measure", *flags], env=env, check=True,
                       capture_output=True)
    assert not (out / "statistics.npy").exists()  # two shards of two: nothing merged yet
    subprocess.run([sys.executable, script, "merge", str(out)], check=True,
                   capture_output=True)
    same_table(out, d / "cli")
