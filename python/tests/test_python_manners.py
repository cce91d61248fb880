"""Python manners: version, docstrings, the interpreter lock released during computation.
Sources: Python's threading model (common practice); the package's own metadata."""

import importlib.metadata
import threading
import time

import numpy as np

import planisphere as ps


def test_version_is_the_library_version_written_in_documents():
    r = ps.measure(ps.sky(16, seed=1), scales=2, tile_pixels=32, border_pixels=4)
    assert ps.__version__ == r.to_dict()["program_version"]
    assert ps.__version__ == importlib.metadata.version("planisphere")


def test_every_public_function_has_a_docstring():
    for name in ps.__all__:
        obj = getattr(ps, name)
        if callable(obj):
            assert obj.__doc__ and len(obj.__doc__.strip()) > 20, name


def test_other_python_threads_run_during_a_measurement():
    m = ps.sky(64, seed=2)
    done = threading.Event()
    result = {}

    def work():
        result["r"] = ps.measure(m, scales=4, threads=1)
        done.set()

    ticks = 0
    worker = threading.Thread(target=work)
    start = time.perf_counter()
    worker.start()
    while not done.is_set():
        ticks += 1  # runs only while the measurement does not hold the interpreter
    worker.join()
    elapsed = time.perf_counter() - start
    # with the lock held for the whole call the loop would run only until the worker takes
    # it (one switch interval, 5 ms: a few 10⁴ ticks); released, it spins throughout (about
    # 5·10⁶ ticks per second here): ask for 2·10⁵ per second of measurement
    assert elapsed > 0.2, "measurement too short to tell"
    assert ticks > 200_000 * elapsed, (ticks, elapsed)
    assert np.isfinite(result["r"].values[0])


def test_contiguous_float64_maps_are_measured_in_place_and_others_copied_once():
    # the library reports the address of the values it measured; a contiguous native float64
    # array must be read where it lies (no copy), anything else converted once
    m = ps.sky(32, seed=3)
    other = ps.sky(32, seed=4)
    m[::97] = ps.UNSEEN  # bad pixels are recognised without writing to the caller's array
    before = m.copy()
    settings = dict(scales=2, tile_pixels=32, border_pixels=4, bispectrum=False)
    mask = np.ones_like(m)
    in_place = ps.measure(m, mask, cross=other, **settings)
    assert in_place.copied_maps == []
    assert np.array_equal(m, before)  # the caller's array is left as it was
    strided = np.empty(2 * m.size)
    strided[::2] = m
    copied = ps.measure(strided[::2], mask, cross=other.astype(np.float32), **settings)
    assert copied.copied_maps == ["map", "second map"]
    single = ps.measure(m, mask, **settings)
    assert single.copied_maps == []
    from_list = ps.measure(list(m), mask, **settings)
    assert from_list.copied_maps == ["map"]
    # the same numbers either way (float32 rounds the second map, so compare the first's)
    assert np.array_equal(in_place.values, copied.values)
    assert np.array_equal(single.values, from_list.values)
