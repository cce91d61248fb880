"""Bad input from Python raises a Python exception with the library's one-line message; the
interpreter never crashes. Source of the expected messages: the library's own wording (the
same lines the command line prints); of the size rule: the HEALPix convention npix = 12·NSIDE²
(Górski et al. 2005)."""

import numpy as np
import pytest

import planisphere as ps


@pytest.fixture(scope="module")
def sky():
    return ps.sky(16, seed=3)


def one_line(excinfo):
    message = str(excinfo.value)
    assert message and "\n" not in message
    return message


def test_wrong_length_map_is_refused(sky):
    with pytest.raises(ValueError, match="not a full-sky HEALPix map") as e:
        ps.measure(sky[:-1])
    one_line(e)


def test_mask_of_another_length_is_refused(sky):
    with pytest.raises(ValueError, match="mask"):
        ps.measure(sky, np.ones(12 * 8 * 8))


def test_all_nan_mask_is_refused(sky):
    # NaN weighs 0, as in a FITS mask: a mask of NaN only has nothing to measure
    with pytest.raises(ValueError, match="empty|no pixel|positive weight"):
        ps.measure(sky, np.full(sky.size, np.nan), scales=2, tile_pixels=32, border_pixels=4)


def test_nan_in_a_mask_weighs_zero_as_in_a_fits_mask(sky):
    mask = np.ones(sky.size)
    mask[:100] = np.nan
    zero = mask.copy()
    zero[:100] = 0.0
    a = ps.measure(sky, mask, scales=2, tile_pixels=32, border_pixels=4).to_dict()
    b = ps.measure(sky, zero, scales=2, tile_pixels=32, border_pixels=4).to_dict()
    assert a == b


def test_mask_outside_zero_one_is_refused(sky):
    mask = np.ones(sky.size)
    mask[5] = 1.5
    with pytest.raises(ValueError, match="mask pixel 5 has weight 1.5"):
        ps.measure(sky, mask)


@pytest.mark.parametrize("bad", [
    np.zeros(3072, dtype=np.complex128),
    np.array(["a"] * 3072),
    np.array([object()] * 3072, dtype=object),
])
def test_wrong_dtype_is_refused(bad):
    with pytest.raises(ValueError, match="real numbers"):
        ps.measure(bad)


def test_two_dimensional_map_is_refused(sky):
    with pytest.raises(ValueError, match="1-D array"):
        ps.measure(sky.reshape(2, -1))
    with pytest.raises(ValueError, match="1-D array"):
        ps.spectra(sky.reshape(2, -1))


def test_one_dimensional_flat_field_is_refused():
    with pytest.raises(ValueError, match="2-D array"):
        ps.measure_flat(np.zeros(64), 1.0)


@pytest.mark.parametrize("settings,message", [
    ({"scales": 40}, "scale|J"),
    ({"orientations": 0}, "orientation|L"),
    ({"orientations": -2}, "orientations must be a whole number"),
    ({"tile_pixels": 7}, "tile|pixels"),
    ({"pixel_arcmin": -3.0}, "pixel"),
    ({"taper": "square"}, "taper must be one of"),
    ({"taper_arcmin": float("nan")}, "taper-arcmin"),
    ({"sampling": "magic"}, "sampling must be one of"),
    ({"ordering": "SPIRAL"}, "ordering must be"),
    ({"threads": 0}, "threads must be from 1"),
    ({"spectrum_bins": 0}, "bin"),
])
def test_absurd_measure_settings_are_refused(sky, settings, message):
    with pytest.raises(ValueError, match=message) as e:
        ps.measure(sky, **settings)
    one_line(e)


def test_map_without_fluctuations_is_refused():
    with pytest.raises(ValueError, match="no fluctuations"):
        ps.measure(np.full(3072, 2.0))


def test_all_bad_map_is_refused():
    with pytest.raises(ValueError, match="every pixel is bad"):
        ps.measure(np.full(3072, ps.UNSEEN))


def test_map_beyond_the_value_limit_is_refused(sky):
    big = sky.copy()
    big[7] = 1e200
    with pytest.raises(ValueError, match="pixel 7 holds"):
        ps.measure(big)


def test_cross_map_of_another_nside_is_refused(sky):
    with pytest.raises(ValueError, match="has NSIDE 16 but second map has NSIDE 8"):
        ps.measure(sky, cross=ps.sky(8, seed=1))


@pytest.mark.parametrize("options,message", [
    ({"nside": 3}, "power of two"),
    ({"nside": -4}, "power of two"),
    ({"count": 0}, "count must be a whole number >= 1"),
    ({"lmax": 10**6}, "lmax|ℓ"),
    ({"model_variance": -1.0}, "model-variance must be positive"),
    ({"beam_arcmin": -5.0}, "beam-arcmin"),
    ({"cl": np.array([1.0, -1.0, 2.0])}, "ell = 1"),
    ({"noise_sigma": 0.1, "shape_noise": (0.3, 10)}, "not both"),
])
def test_absurd_sky_requests_are_refused(options, message):
    options = {"nside": 16, **options}
    with pytest.raises(ValueError, match=message):
        ps.sky(**options)


@pytest.mark.parametrize("options,message", [
    ({"bin_width": 0}, "bin-width"),
    ({"lmax": 0}, "lmax"),
    ({"lmax": 10**5}, "lmax|ℓ"),
    ({"bin_weighting": "octaves"}, "bin_weighting must be one of"),
    ({"beam_arcmin": float("inf")}, "beam-arcmin"),
    ({"iterations": 10**6}, "iteration"),
])
def test_absurd_spectra_settings_are_refused(sky, options, message):
    with pytest.raises(ValueError, match=message):
        ps.spectra(sky, **options)


@pytest.mark.parametrize("shape,message", [
    ((64, 32), "square"),
    ((100, 100), "2\\^k"),
])
def test_flat_field_of_a_bad_shape_is_refused(shape, message):
    with pytest.raises(ValueError, match=message):
        ps.measure_flat(np.random.default_rng(1).standard_normal(shape), 1.0)


def test_flat_field_with_nan_outside_the_mask_is_refused():
    f = np.random.default_rng(2).standard_normal((32, 32))
    f[3, 4] = np.nan
    with pytest.raises(ValueError, match="row 3, column 4"):
        ps.measure_flat(f, 1.0, scales=3)
    with pytest.raises(ValueError, match="pixel size must be positive"):
        ps.measure_flat(np.zeros((32, 32)), 0.0)


def test_forecast_with_mismatched_inputs_is_refused():
    rng = np.random.default_rng(3)
    fid = rng.standard_normal((30, 3))
    labels = ["full.S1_j0_l0", "full.S1_j1_l0", "full.S1_j2_l0"]
    ok = rng.standard_normal((10, 3))
    with pytest.raises(ValueError, match="columns but 2 labels"):
        ps.forecast(fid, labels[:2], [("A", 0.1, ok, ok)])
    with pytest.raises(ValueError, match="step of 'A' must be positive"):
        ps.forecast(fid, labels, [("A", 0.0, ok, ok)])
    with pytest.raises(ValueError, match="twice"):
        ps.forecast(fid, labels, [("A", 0.1, ok, ok), ("A", 0.2, ok, ok)])
    with pytest.raises(ValueError, match="columns"):
        ps.forecast(fid, labels, [("A", 0.1, ok[:, :2], ok)])
    with pytest.raises(ValueError, match="not a parameter"):
        ps.forecast(fid, labels, [("A", 0.1, ok, ok)], fiducial_values={"B": 1.0})


def test_missing_or_broken_files_raise_oserror(tmp_path):
    with pytest.raises(OSError):
        ps.read_map(tmp_path / "nowhere.fits")
    (tmp_path / "text.fits").write_text("not a FITS file\n")
    with pytest.raises(OSError) as e:
        ps.read_map(tmp_path / "text.fits")
    one_line(e)
    with pytest.raises(OSError):
        ps.read_table(tmp_path)


def test_write_map_refuses_a_map_of_a_bad_size_and_leaves_no_file(tmp_path):
    with pytest.raises(ValueError, match="not a full-sky"):
        ps.write_map(tmp_path / "w.fits", np.zeros(100))
    assert not (tmp_path / "w.fits").exists()
