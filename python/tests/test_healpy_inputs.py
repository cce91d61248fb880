"""Maps read by healpy and passed straight in give the same result as the FITS file through
the command line, whatever their dtype, byte order and ordering.

Sources: healpy 1.20.1 (`write_map`, `read_map`, `reorder`) writes and reads the files; the
expectation is the `planisphere` command line of this checkout on the same file."""

import json

import healpy as hp
import numpy as np
import pytest

import planisphere as ps


@pytest.mark.parametrize("dtype,nest", [
    (np.float64, False),
    (np.float32, False),
    (np.float64, True),
    (np.float32, True),
])
def test_healpy_read_map_gives_the_command_line_result(inputs, cli, tmp_path, dtype, nest):
    sky = ps.read_map(inputs["map"])
    values = hp.reorder(sky, r2n=True) if nest else sky
    path = tmp_path / "m.fits"
    hp.write_map(str(path), values.astype(dtype), nest=nest, dtype=dtype, overwrite=True)
    out = tmp_path / "m.json"
    cli("measure", path, "-J", 3, "--spectrum-bins", 4, "-o", out)
    m = hp.read_map(str(path), nest=None, dtype=None)  # the file's ordering and dtype
    assert m.dtype.byteorder == ">" and m.dtype.itemsize == np.dtype(dtype).itemsize
    ordering = "NESTED" if nest else "RING"
    r = ps.measure(m, ordering=ordering, scales=3, spectrum_bins=4, name=str(path))
    assert r.to_dict() == json.loads(out.read_text())
    # any byte order: healpy hands the file's big-endian values; native ones give the same
    swapped = m.astype(m.dtype.newbyteorder("="))
    assert ps.measure(swapped, ordering=ordering, scales=3, spectrum_bins=4,
                      name=str(path)).to_dict() == json.loads(out.read_text())


def test_healpy_nested_mask_with_ring_map_after_reorder(inputs, cli, tmp_path):
    # healpy's read_map converts to RING by default (nest=False): a NESTED mask file read
    # that way pairs with a RING map as the command line pairs the two files
    mask = hp.read_map(str(inputs["mask"]))
    nested_mask = tmp_path / "mask_nested.fits"
    hp.write_map(str(nested_mask), hp.reorder(mask, r2n=True), nest=True, overwrite=True)
    out = tmp_path / "m.json"
    cli("measure", inputs["map"], "--mask", nested_mask, "-J", 3, "-o", out)
    m = hp.read_map(str(inputs["map"]))
    w = hp.read_map(str(nested_mask))  # converted to RING by healpy
    r = ps.measure(m, w, scales=3, name=str(inputs["map"]), mask_name=str(nested_mask))
    assert r.to_dict() == json.loads(out.read_text())


def test_healpy_unseen_pixels_are_bad_pixels(inputs, cli, tmp_path):
    m = hp.read_map(str(inputs["map"]))
    m[: len(m) // 3] = hp.UNSEEN  # healpy's sentinel, −1.6375e30
    path = tmp_path / "holes.fits"
    hp.write_map(str(path), m, overwrite=True, dtype=np.float64)
    out = tmp_path / "m.json"
    cli("measure", path, "-J", 3, "-o", out)
    r = ps.measure(hp.read_map(str(path)), scales=3, name=str(path))
    assert r.to_dict() == json.loads(out.read_text())
    with_nan = np.where(m == hp.UNSEEN, np.nan, m)
    assert ps.measure(with_nan, scales=3, name=str(path)).to_dict() == r.to_dict()


def test_write_map_round_trips_through_healpy(tmp_path):
    m = ps.sky(16, seed=2)
    ps.write_map(tmp_path / "w.fits", m, coordsys="G")
    np.testing.assert_array_equal(hp.read_map(str(tmp_path / "w.fits")), m)
    values, header = ps.read_map(tmp_path / "w.fits", with_header=True)
    np.testing.assert_array_equal(values, m)
    assert (header["nside"], header["ordering"], header["coordsys"]) == (16, "RING", "G")
    ps.write_map(tmp_path / "n.fits", hp.reorder(m, r2n=True), ordering="NESTED", float32=True)
    np.testing.assert_array_equal(hp.read_map(str(tmp_path / "n.fits")),
                                  m.astype(np.float32))
