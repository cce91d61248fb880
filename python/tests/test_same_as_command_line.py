"""Python and the command line give bitwise the same results on the same inputs and settings.

Source of every expectation here: the `planisphere` command line built from the same checkout
(the same library code underneath), run on the same files; JSON numbers are compared exactly
(serde_json writes the shortest round-trip representation, Python parses it exactly)."""

import json

import numpy as np
import pytest

import planisphere as ps


def load_json(path):
    with open(path) as f:
        return json.load(f)


def test_measure_equals_command_line_document_field_for_field(inputs, cli, tmp_path):
    out = tmp_path / "m.json"
    cli("measure", inputs["map"], "--mask", inputs["mask"], "-J", 3, "-L", 4,
        "--taper-arcmin", 90, "--spectrum-bins", 5, "-o", out)
    r = ps.measure(ps.read_map(inputs["map"]), ps.read_mask(inputs["mask"]), scales=3,
                   orientations=4, taper_arcmin=90, spectrum_bins=5,
                   name=str(inputs["map"]), mask_name=str(inputs["mask"]))
    expected = load_json(out)
    assert r.to_dict() == expected
    # the labelled arrays are the document's numbers
    values = [np.nan if c["value"] is None else c["value"] for c in expected["coefficients"]]
    np.testing.assert_array_equal(r.values, np.array(values))
    assert list(r.trusted) == [c["trusted"] for c in expected["coefficients"]]
    assert r.trusted.any() and not r.trusted.all()
    assert len(r.vector) == len(r.vector_labels) == len(r.vector_scales_arcmin)


def test_measure_options_reach_the_library_as_on_the_command_line(inputs, cli, tmp_path):
    out = tmp_path / "m.json"
    cli("measure", inputs["map"], "-J", 2, "-L", 3, "--sampling", "bilinear",
        "--border-pixels", 6, "--coarse-nside", 4, "--no-bispectrum", "--taper", "c1",
        "--full-resolution", "-o", out)
    r = ps.measure(ps.read_map(inputs["map"]), scales=2, orientations=3, sampling="bilinear",
                   border_pixels=6, coarse_nside=4, bispectrum=False, taper="c1",
                   full_resolution=True, name=str(inputs["map"]))
    assert r.to_dict() == load_json(out)
    assert r.tile_bispectrum is None


def test_measure_pair_equals_command_line_cross_document(inputs, cli, tmp_path):
    out = tmp_path / "cross.json"
    cli("measure", inputs["map"], "--mask", inputs["mask"], "--cross", inputs["other"],
        "-J", 3, "-o", out)
    r = ps.measure(ps.read_map(inputs["map"]), ps.read_mask(inputs["mask"]),
                   cross=ps.read_map(inputs["other"]), scales=3, name=str(inputs["map"]),
                   mask_name=str(inputs["mask"]), cross_name=str(inputs["other"]))
    assert r.to_dict() == load_json(out)
    assert len(r.cross_coefficients) > 0


def test_measure_is_bitwise_the_same_on_one_and_two_threads(inputs):
    m, mask = ps.read_map(inputs["map"]), ps.read_mask(inputs["mask"])
    a = ps.measure(m, mask, scales=3, threads=1).to_dict()
    b = ps.measure(m, mask, scales=3, threads=2).to_dict()
    # the tiling summary reports the threads and the memory of the tiles in flight, one per
    # thread (so the local pool is used); everything else is identical (crate rule: results
    # bitwise identical for any thread count)
    assert (a["tiling"].pop("threads"), b["tiling"].pop("threads")) == (1, 2)
    assert b["tiling"].pop("bytes_in_flight") == 2 * a["tiling"].pop("bytes_in_flight")
    assert a == b


def test_flat_field_equals_command_line(cli, tmp_path):
    rng = np.random.default_rng(5)  # invented data (numpy 2.4 generator)
    field = rng.standard_normal((64, 64))
    mask = np.ones((64, 64))
    mask[20:30, 10:40] = 0.0
    field[25, 25] = np.nan  # allowed under the mask
    np.save(tmp_path / "f.npy", field)
    np.save(tmp_path / "mask.npy", mask)
    out = tmp_path / "f.json"
    cli("measure", tmp_path / "f.npy", "--pixel-arcmin", 2, "--mask", tmp_path / "mask.npy",
        "-J", 4, "-o", out)
    r = ps.measure_flat(field, 2.0, mask, scales=4, name=str(tmp_path / "f.npy"),
                        mask_name=str(tmp_path / "mask.npy"))
    assert r.to_dict() == load_json(out)
    periodic = tmp_path / "p.json"
    np.save(tmp_path / "g.npy", rng.standard_normal((32, 32)).astype(np.float32))
    cli("measure", tmp_path / "g.npy", "--pixel-arcmin", 1.5, "-J", 3, "-o", periodic)
    g = np.load(tmp_path / "g.npy")
    assert ps.measure_flat(g, 1.5, scales=3, name=str(tmp_path / "g.npy")).to_dict() \
        == load_json(periodic)


def test_spectra_equal_command_line_json_and_csv(inputs, cli, tmp_path):
    js, csv = tmp_path / "cl.json", tmp_path / "cl.csv"
    cli("spectra", inputs["map"], "--mask", inputs["mask"], "--bin-width", 12,
        "--bin-weighting", "dl", "--beam-arcmin", 30, "--pixel-window", "--json", js,
        "--csv", csv)
    s = ps.spectra(ps.read_map(inputs["map"]), ps.read_mask(inputs["mask"]), bin_width=12,
                   bin_weighting="dl", beam_arcmin=30, pixel_window=True)
    assert s.to_dict() == load_json(js)
    assert s.csv == csv.read_text()
    cross = tmp_path / "x.json"
    cli("spectra", inputs["map"], "--cross", inputs["other"], "--lmax", 100, "--json", cross)
    x = ps.spectra(ps.read_map(inputs["map"]), cross=ps.read_map(inputs["other"]), lmax=100)
    assert x.to_dict() == load_json(cross)


@pytest.mark.parametrize("options", [
    {"lognormal_shift": 0.02, "noise_sigma": 0.001, "seed": 7},
    {"beam_arcmin": 60.0, "model_variance": 2e-4, "seed": 8, "lmax": 80},
    {"shape_noise": (0.26, 30.0), "seed": 9, "gaussian_spectrum": True, "lognormal_shift": 0.05},
])
def test_sky_equals_command_line_for_the_same_seed(cli, tmp_path, options):
    flags = []
    for key, value in options.items():
        flag = "--" + key.replace("_", "-")
        if value is True:
            flags.append(flag)
        elif isinstance(value, tuple):
            flags += [flag, ",".join(str(v) for v in value)]
        else:
            flags += [flag, value]
    cli("sky", "-o", tmp_path / "s_{index}.fits", "--nside", 32, "--count", 3,
        "--first-index", 2, *flags)
    skies = ps.sky(32, count=3, first_index=2, **options)
    for k in range(3):
        np.testing.assert_array_equal(skies[k], ps.read_map(tmp_path / f"s_{k + 2:04d}.fits"))
    one = ps.sky(32, first_index=3, **options)
    np.testing.assert_array_equal(one, skies[1])


def test_sky_from_a_spectrum_table_equals_command_line(cli, tmp_path):
    ell = np.arange(0, 96)
    cl = 1e-5 / (1.0 + (ell / 20.0) ** 2)
    cl[:2] = 0.0
    np.savetxt(tmp_path / "cl.txt", np.column_stack([ell, cl]), fmt=["%d", "%.17e"])
    cli("sky", "-o", tmp_path / "s.fits", "--nside", 32, "--spectrum", tmp_path / "cl.txt",
        "--seed", 4)
    np.testing.assert_array_equal(ps.sky(32, cl=cl, seed=4), ps.read_map(tmp_path / "s.fits"))


@pytest.fixture(scope="module")
def ensembles(tmp_path_factory, cli):
    """Three small simulated ensembles (NSIDE 32, J = 2) made by `planisphere ensemble`: the
    fiducial one and the model variance ± 10% with the same seeds (paired)."""
    d = tmp_path_factory.mktemp("ensembles")
    settings = ["-J", 2, "-L", 4, "--tile-pixels", 32, "--border-pixels", 4, "--quiet"]
    for name, variance, count, seed in [("fid", 1e-4, 24, 1), ("plus", 1.1e-4, 8, 100),
                                       ("minus", 0.9e-4, 8, 100)]:
        recipe = d / f"{name}.toml"
        recipe.write_text(f"nside = 32\ncount = {count}\nseed = {seed}\n"
                          f"model_variance = {variance}\nlognormal_shift = 0.03\n")
        cli("ensemble", "--simulate", recipe, "-o", d / name, *settings)
    return d


def test_forecast_equals_command_line(ensembles, cli, tmp_path):
    d = ensembles
    out, csv = tmp_path / "f.json", tmp_path / "f.csv"
    derivative = f"A,0.1,{d / 'plus'},{d / 'minus'}"
    cli("forecast", "--fiducial", d / "fid", "--derivative", derivative, "--paired",
        "--fiducial-value", "A=1", "--scale-min-arcmin", 100, "-o", out, "--csv", csv)
    fid, plus, minus = (ps.read_table(d / n) for n in ("fid", "plus", "minus"))
    settings = {"fiducial": str(d / "fid"), "derivatives": [derivative], "paired": True,
                "scale_min_arcmin": 100.0, "scale_max_arcmin": None}
    f = ps.forecast(fid.values, fid.labels, [("A", 0.1, plus.values, minus.values)],
                    scales_arcmin=fid.scales_arcmin, paired=True, fiducial_values={"A": 1.0},
                    scale_min_arcmin=100.0, settings=settings)
    assert f.to_dict() == load_json(out)
    assert f.table_csv == csv.read_text()
    ok = [name for name, e in f.errors.items() if e is not None]
    assert ok, "at least one statistic set is forecast"
    for name in ok:
        # σ = sqrt of the diagonal of F⁻¹ (Fisher 1935; Tegmark, Taylor & Heavens 1997)
        sigma = np.sqrt(np.diag(np.linalg.inv(f.fisher[name])))
        np.testing.assert_allclose(sigma, f.errors[name], rtol=1e-10)


def test_read_table_equals_the_merged_npy(ensembles):
    t = ps.read_table(ensembles / "fid")
    np.testing.assert_array_equal(t.values, np.load(ensembles / "fid" / "statistics.npy"))
    sidecar = json.loads((ensembles / "fid" / "statistics.json").read_text())
    assert t.labels == sidecar["columns"]
    assert t.scales_arcmin == sidecar["settings"]["label_scales_arcmin"]


def test_measure_of_files_equals_command_line_without_naming_them(inputs, cli, tmp_path):
    out = tmp_path / "m.json"
    cli("measure", inputs["map"], "--mask", inputs["mask"], "-J", 3, "-o", out)
    assert ps.measure(str(inputs["map"]), str(inputs["mask"]), scales=3).to_dict() \
        == load_json(out)
    cross = tmp_path / "c.json"
    cli("measure", inputs["map"], "--cross", inputs["other"], "--cross-mask", inputs["mask"],
        "-J", 3, "-o", cross)
    r = ps.measure(str(inputs["map"]), cross=inputs["other"], cross_mask=inputs["mask"],
                   scales=3)
    assert r.to_dict() == load_json(cross)
