"""planisphere from Python: wavelet scattering statistics of HEALPix maps on masked footprints.

numpy in, numpy out. Every function runs the same library code as the ``planisphere`` command
line, so the same map, mask and settings give bitwise the same numbers; option names are the
command line's (``--taper-arcmin`` is ``taper_arcmin=``).

Manners

- Maps are 1-D arrays of 12·NSIDE² values in RING or NESTED order (``ordering=``), bad pixels
  UNSEEN or NaN. Any real dtype and byte order is accepted (what ``healpy.read_map`` returns);
  it is converted to native float64 only when it is not already a contiguous native float64
  array (then numpy makes one copy). The library then holds one copy of the map in its own
  layout, as the command line does after reading a file.
- The interpreter lock is released during computation, so Python threads (or a Dask worker)
  can run several measurements at once.
- ``threads=n`` runs one call on a local pool of n threads; without it the call uses rayon's
  global pool, sized by the environment variable RAYON_NUM_THREADS (default: every core).
  Results are bitwise identical for any thread count.
- Errors raise ``ValueError`` (bad values, settings, mismatches) or ``OSError`` (files), with
  the library's one-line messages.
"""

from __future__ import annotations

import json
import os
import warnings
from dataclasses import dataclass, field
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple, Union

import numpy as np

from . import _native

__version__: str = _native.__version__
UNSEEN: float = _native.UNSEEN

__all__ = [
    "__version__",
    "UNSEEN",
    "Measurement",
    "Spectra",
    "Forecast",
    "Table",
    "measure",
    "measure_flat",
    "sky",
    "spectra",
    "forecast",
    "read_map",
    "read_mask",
    "write_map",
    "ensemble",
    "merge",
    "read_table",
]


def _real_array(values: Any, what: str, ndim: int, allow_bool: bool = False) -> np.ndarray:
    """``values`` as a contiguous native float64 array of ``ndim`` dimensions (no copy when it
    already is one), or ValueError."""
    array = np.asarray(values)
    kinds = "fiub" if allow_bool else "fiu"
    if array.dtype.kind not in kinds:
        raise ValueError(f"{what} must hold real numbers, got dtype {array.dtype}")
    if array.ndim != ndim:
        shape = " × ".join(str(s) for s in array.shape) or "a scalar"
        need = "1-D array (a full-sky HEALPix map)" if ndim == 1 else f"{ndim}-D array"
        raise ValueError(f"{what} must be a {need}, got shape {shape}")
    return np.ascontiguousarray(array, dtype=np.float64)


def _optional(values: Any, what: str, ndim: int, allow_bool: bool = False) -> Optional[np.ndarray]:
    return None if values is None else _real_array(values, what, ndim, allow_bool)


_COEFFICIENT_DTYPE = np.dtype(
    [
        ("kind", "U10"),
        ("order", "i1"),
        ("j1", "i4"),
        ("l1", "i4"),
        ("j2", "i4"),
        ("l2", "i4"),
        ("value", "f8"),
        ("trusted", "?"),
        ("kept_weight_fraction", "f8"),
    ]
)

_CROSS_DTYPE = np.dtype(
    [
        ("name", "U48"),
        ("field", "U8"),
        ("modulus_of", "U8"),
        ("order", "i1"),
        ("j1", "i4"),
        ("l1", "i4"),
        ("j2", "i4"),
        ("l2", "i4"),
        ("value", "f8"),
        ("trusted", "?"),
        ("kept_weight_fraction", "f8"),
    ]
)


def _number(v: Any) -> float:
    return float("nan") if v is None else float(v)


def _index(v: Any) -> int:
    return -1 if v is None else int(v)


def _coefficient_table(records: Sequence[Mapping[str, Any]]) -> np.ndarray:
    out = np.zeros(len(records), dtype=_COEFFICIENT_DTYPE)
    for i, r in enumerate(records):
        out[i] = (
            r.get("kind", "band power"),
            r["order"],
            _index(r["j1"]),
            _index(r["l1"]),
            _index(r["j2"]),
            _index(r["l2"]),
            _number(r["value"]),
            r["trusted"],
            r["kept_weight_fraction"],
        )
    return out


def _cross_table(records: Sequence[Mapping[str, Any]]) -> np.ndarray:
    out = np.zeros(len(records), dtype=_CROSS_DTYPE)
    for i, r in enumerate(records):
        out[i] = (
            r["name"],
            r["field"],
            r["modulus_of"] or "",
            r["order"],
            _index(r["j1"]),
            _index(r["l1"]),
            _index(r["j2"]),
            _index(r["l2"]),
            _number(r["value"]),
            r["trusted"],
            r["kept_weight_fraction"],
        )
    return out


class Measurement:
    """The statistics of one map (or a pair of maps) on its footprint.

    Attributes (arrays are numpy; a value that could not be computed is NaN and untrusted;
    absent scale or orientation indices are -1):

    - ``coefficients``: structured array (kind, order, j1, l1, j2, l2, value, trusted,
      kept_weight_fraction) of orders 0–2, as ``measure``'s JSON lists them;
    - ``values``, ``trusted``: the coefficients' values and trust flags;
    - ``band_powers``: structured array of the band powers (same fields);
    - ``summary``: the orientation-harmonic summary as a dict name → (value, trusted);
    - ``tile_power_spectrum``, ``tile_bispectrum``: dicts of the tile spectra (None without a
      bispectrum);
    - ``settings``, ``tiling``: the settings used and the tiling summary;
    - ``vector``, ``vector_labels``, ``vector_scales_arcmin``: every statistic as one vector
      with its column names and angular scales, the row an ensemble table holds (before its
      pseudo-C_ℓ columns); sphere maps only (None for a flat field);
    - ``cross``: for a pair, the second map's statistics (a Measurement-like dict) and
      ``cross_coefficients`` (structured array with name, field, modulus_of, ...);
    - ``copied_maps``: which map arrays ("map", "second map") were copied before measuring
      because they were not contiguous native float64; an array not named here was read in
      place (empty for files and flat fields).

    ``to_dict()`` is ``measure``'s JSON document, field for field.
    """

    def __init__(
        self,
        document: str,
        vector: Sequence[float],
        labels: Sequence[str],
        scales: Sequence[Optional[float]],
        copied_maps: Sequence[str] = (),
    ) -> None:
        self._document: Dict[str, Any] = json.loads(document)
        self.copied_maps: List[str] = list(copied_maps)
        doc = self._document
        self.coefficients: np.ndarray = _coefficient_table(doc["coefficients"])
        self.values: np.ndarray = self.coefficients["value"].copy()
        self.trusted: np.ndarray = self.coefficients["trusted"].copy()
        self.band_powers: np.ndarray = _coefficient_table(doc["band_powers"])
        self.summary: Dict[str, Tuple[float, bool]] = {
            s["name"]: (_number(s["value"]), bool(s["trusted"])) for s in doc["summary"]
        }
        self.tile_power_spectrum: Dict[str, Any] = doc["tile_power_spectrum"]
        self.tile_bispectrum: Optional[Dict[str, Any]] = doc["tile_bispectrum"]
        self.settings: Dict[str, Any] = doc["settings"]
        self.tiling: Dict[str, Any] = doc["tiling"]
        sphere = len(labels) > 0
        self.vector: Optional[np.ndarray] = np.asarray(vector, dtype=np.float64) if sphere else None
        self.vector_labels: Optional[List[str]] = list(labels) if sphere else None
        self.vector_scales_arcmin: Optional[List[Optional[float]]] = list(scales) if sphere else None
        cross = doc.get("cross")
        self.cross: Optional[Dict[str, Any]] = cross
        self.cross_coefficients: Optional[np.ndarray] = None
        if cross is not None:
            self.cross_coefficients = _cross_table(
                cross["cross_band_powers"]
                + cross["envelope_first_order"]
                + cross["envelope_second_order"]
            )

    def summary_values(self) -> np.ndarray:
        """The summary's values, in the document's order."""
        return np.array([v for v, _ in self.summary.values()], dtype=np.float64)

    def to_dict(self) -> Dict[str, Any]:
        """``measure``'s JSON document as a dict (a fresh copy)."""
        return json.loads(json.dumps(self._document))

    def to_json(self, indent: Optional[int] = 2) -> str:
        """The document as JSON text."""
        return json.dumps(self._document, indent=indent)

    def __repr__(self) -> str:
        return (
            f"Measurement({len(self.coefficients)} coefficients, {int(self.trusted.sum())} trusted, "
            f"{len(self.summary)} summary items, {self._document['tiles_measured']} tiles)"
        )


def _is_path(x: Any) -> bool:
    return isinstance(x, (str, os.PathLike))


def _map_argument(x: Any, what: str, allow_bool: bool = False) -> Tuple[Optional[np.ndarray], Optional[str]]:
    """(array, None) for an array, (None, path) for a file name, (None, None) for None."""
    if x is None:
        return None, None
    if _is_path(x):
        return None, os.fspath(x)
    return _real_array(x, what, 1, allow_bool), None


def measure(
    map: Any,
    mask: Any = None,
    *,
    ordering: str = "RING",
    column: Union[int, str] = 0,
    mask_column: Union[int, str] = 0,
    cross: Any = None,
    cross_mask: Any = None,
    cross_column: Union[int, str] = 0,
    cross_mask_column: Union[int, str] = 0,
    allow_coordsys_mismatch: bool = False,
    taper: str = "c2",
    taper_arcmin: float = 60.0,
    scales: Optional[int] = None,
    orientations: Optional[int] = None,
    tile_pixels: Optional[int] = None,
    coarse_nside: Optional[int] = None,
    pixel_arcmin: Optional[float] = None,
    border_pixels: Optional[int] = None,
    sampling: Optional[str] = None,
    spectrum_bins: Optional[int] = None,
    bispectrum: bool = True,
    full_resolution: bool = False,
    threads: Optional[int] = None,
    name: Optional[str] = None,
    mask_name: Optional[str] = None,
    cross_name: Optional[str] = None,
    cross_mask_name: Optional[str] = None,
) -> Measurement:
    """Scattering statistics of a HEALPix map on its footprint (the ``measure`` command).

    ``map``: 1-D array of 12·NSIDE² values (``ordering`` "RING" or "NESTED"; UNSEEN/NaN bad),
    or the path of a HEALPix FITS file (``column``), read by the library as the command line
    reads it (the lightest way in memory: no array stays with the caller).
    ``mask``: weights in [0, 1] in the map's ordering (NaN/UNSEEN weigh 0, as in a FITS
    mask), or a FITS file (``mask_column``; another ordering is converted, COORDSYS compared
    unless ``allow_coordsys_mismatch``); without it the map's valid pixels are the footprint.
    Binary masks are tapered by ``taper`` ("c1", "c2", "gaussian", "none") over
    ``taper_arcmin``.
    ``cross``: a second map (same NSIDE; array in the same ordering, or a file) measured on the
    common footprint with its own mask ``cross_mask``; adds the cross statistics.
    Settings (defaults as the command line's): ``scales`` J (4), ``orientations`` L (4),
    ``tile_pixels``, ``coarse_nside``, ``pixel_arcmin``, ``border_pixels`` (8), ``sampling``
    ("ring-quintic", "ring-cubic", "bilinear", "ring-linear", "nearest"), ``spectrum_bins`` (6),
    ``bispectrum`` (True), ``full_resolution`` (False: Fourier cropping on).
    ``name``, ``mask_name``, ``cross_name``, ``cross_mask_name``: how the document names the
    inputs (default: the file path, as the command line writes it, or a description).
    The reader's warnings (e.g. an assumed ordering) are issued as Python warnings.

    Copies: a map array that is C-contiguous native float64 (what healpy and numpy make by
    default) is read in place, never copied; any other (float32, big-endian, strided, a list)
    is converted once to one, and ``copied_maps`` of the result names it. Do not write to the
    arrays from another thread during the call (the computation reads them without the
    interpreter lock). A C-contiguous native float64 mask array is read in place too: the
    library stores beside it only the weights it changes (the tapered band along the mask's
    edges, its bad values and the map's bad pixels, which weigh 0); any other mask is converted
    once.
    """
    values, path = _map_argument(map, "the map")
    if values is None and path is None:
        raise ValueError("measure needs a map")
    weights, mask_path = _map_argument(mask, "the mask", allow_bool=True)
    other, other_path = _map_argument(cross, "the second map")
    other_weights, other_mask_path = _map_argument(cross_mask, "the second mask", allow_bool=True)
    if other is None and other_path is None and cross_mask is not None:
        raise ValueError("cross_mask needs cross (the second map)")
    if name is None:
        name = path if path is not None else "map"
    if mask_name is None and mask is not None:
        mask_name = mask_path if mask_path is not None else "mask array"
    if cross_name is None:
        cross_name = other_path if other_path is not None else "second map"
    if cross_mask_name is None and cross_mask is not None:
        cross_mask_name = other_mask_path if other_mask_path is not None else "second mask array"
    out = _native.measure_map(
        values, path, str(column), ordering,
        weights, mask_path, str(mask_column), name, mask_name,
        other, other_path, str(cross_column),
        other_weights, other_mask_path, str(cross_mask_column),
        cross_name, cross_mask_name, bool(allow_coordsys_mismatch),
        taper, float(taper_arcmin), scales, orientations, tile_pixels, coarse_nside,
        None if pixel_arcmin is None else float(pixel_arcmin), border_pixels, sampling,
        spectrum_bins, bool(bispectrum), bool(full_resolution), threads,
    )
    for message in out[4]:
        warnings.warn(message, stacklevel=2)
    copied = [
        what
        for what, given, address in (("map", map, out[5][0]), ("second map", cross, out[5][1]))
        if address is not None and address != _data_address(given)
    ]
    return Measurement(*out[:4], copied_maps=copied)


def _data_address(given: Any) -> Optional[int]:
    """The address of the buffer of the array the caller gave (None for anything else: a list
    or a scalar is converted, i.e. copied, whatever happens next)."""
    if isinstance(given, np.ndarray):
        return int(given.__array_interface__["data"][0])
    return None


def measure_flat(
    field: Any,
    pixel_arcmin: float,
    mask: Any = None,
    *,
    scales: Optional[int] = None,
    orientations: Optional[int] = None,
    spectrum_bins: Optional[int] = None,
    bispectrum: bool = True,
    full_resolution: bool = False,
    threads: Optional[int] = None,
    name: str = "field",
    mask_name: Optional[str] = None,
) -> Measurement:
    """Scattering statistics of a flat field as one tile (``measure FIELD.npy``).

    ``field``: n × n array, n = 2^k·m (m = 1, 3, 5, 7, 9); periodic without ``mask``; with a
    mask (same shape, values in [0, 1], 0 = masked) the mask is the taper and weight as given,
    and non-finite field values are allowed where it is 0. ``pixel_arcmin``: pixel side.
    """
    values = _real_array(field, "the field", 2)
    weights = _optional(mask, "the mask", 2, allow_bool=True)
    if weights is not None and mask_name is None:
        mask_name = "mask array"
    out = _native.measure_flat(
        values,
        float(pixel_arcmin),
        weights,
        name,
        mask_name,
        scales,
        orientations,
        spectrum_bins,
        bool(bispectrum),
        bool(full_resolution),
        threads,
    )
    return Measurement(*out[:4])


def sky(
    nside: int = 128,
    *,
    count: Optional[int] = None,
    first_index: int = 0,
    seed: int = 1,
    model_variance: float = 1e-4,
    cl: Any = None,
    lmax: Optional[int] = None,
    lognormal_shift: Optional[float] = None,
    gaussian_spectrum: bool = False,
    beam_arcmin: Optional[float] = None,
    noise_sigma: Optional[float] = None,
    shape_noise: Optional[Tuple[float, float]] = None,
    threads: Optional[int] = None,
) -> np.ndarray:
    """Simulated skies in RING order (the ``sky`` command): Gaussian, or shifted lognormal with
    ``lognormal_shift`` κ0, of the built-in model spectrum of variance ``model_variance`` or of
    ``cl`` (C_ℓ for ℓ = 0, 1, ...), with an optional Gaussian beam and white noise
    (``noise_sigma`` per pixel, or ``shape_noise`` = (σ_e, galaxies per arcmin²)).

    Sky i uses a random stream derived from (seed, i), as the command line's. Returns one map
    (1-D) when ``count`` is None, else a (count × 12·NSIDE²) array of skies first_index, ...
    """
    if noise_sigma is not None and shape_noise is not None:
        raise ValueError("give noise_sigma or shape_noise, not both")
    spectrum = _optional(cl, "cl", 1)
    n = 1 if count is None else count
    if shape_noise is not None:
        shape_noise = (float(shape_noise[0]), float(shape_noise[1]))
    maps = _native.sky(
        nside,
        n,
        first_index,
        seed,
        float(model_variance),
        spectrum,
        lmax,
        lognormal_shift,
        bool(gaussian_spectrum),
        beam_arcmin,
        noise_sigma,
        shape_noise,
        threads,
    )
    return maps[0] if count is None else maps


@dataclass
class Spectra:
    """Pseudo-C_ℓ and MASTER band powers (the ``spectra`` command).

    ``cl``: C̃_ℓ / w2 for ℓ = 0 … ℓmax; ``bins``: structured array (ell_min, ell_max, ell_mean,
    w2_estimate, w2_error, master, master_error, modes); ``csv``: the ``--csv`` text;
    ``to_dict()``: the ``--json`` document.
    """

    document: Dict[str, Any]
    csv: str
    cl: np.ndarray = field(init=False)
    bins: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        self.cl = np.array([_number(c) for c in self.document["cl"]], dtype=np.float64)
        names = ["ell_min", "ell_max", "ell_mean", "w2_estimate", "w2_error", "master",
                 "master_error", "modes"]
        dtype = np.dtype([(n, "i8" if n.startswith("ell_m") and n != "ell_mean" else "f8")
                          for n in names])
        rows = self.document["band_powers"]["bins"]
        self.bins = np.array(
            [tuple(_number(b[n]) if dtype[n].kind == "f" else int(b[n]) for n in names)
             for b in rows],
            dtype=dtype,
        )

    def to_dict(self) -> Dict[str, Any]:
        return json.loads(json.dumps(self.document))


def spectra(
    map: Any,
    mask: Any = None,
    *,
    ordering: str = "RING",
    cross: Any = None,
    taper: str = "c2",
    taper_arcmin: float = 60.0,
    lmax: Optional[int] = None,
    bin_width: int = 16,
    bin_weighting: str = "cl",
    beam_arcmin: float = 0.0,
    pixel_window: bool = False,
    iterations: int = 0,
    threads: Optional[int] = None,
    name: str = "map",
    cross_name: str = "second map",
) -> Spectra:
    """Angular power spectrum of a map on its footprint (the ``spectra`` command): pseudo-C_ℓ
    with the w2 correction and MASTER band powers; with ``cross``, the cross-spectrum.
    ``lmax`` defaults to 2·NSIDE; ``bin_weighting`` "cl" or "dl"."""
    values = _real_array(map, "the map", 1)
    weights = _optional(mask, "the mask", 1, allow_bool=True)
    other = _optional(cross, "the second map", 1)
    document, csv = _native.spectra(
        values, ordering, weights, name, other, cross_name, taper, float(taper_arcmin), lmax,
        bin_width, bin_weighting, float(beam_arcmin), bool(pixel_window), iterations, threads,
    )
    return Spectra(json.loads(document), csv)


@dataclass
class Forecast:
    """A Fisher forecast per statistic set (the ``forecast`` command).

    ``parameters``: names; ``errors``: dict set → marginalised errors (array, None when the
    set failed); ``fisher``: dict set → Fisher matrix; ``parameter_covariance``: dict set →
    matrix; ``table_csv`` / ``table_text``: the comparison table as ``--csv`` and as printed;
    ``warning``: which sets failed, if some did; ``to_dict()``: the ``-o`` JSON document.
    """

    document: Dict[str, Any]
    table_csv: str
    table_text: str
    warning: Optional[str]
    fisher: Dict[str, Optional[np.ndarray]]

    @property
    def parameters(self) -> List[str]:
        return list(self.document["parameters"])

    @property
    def errors(self) -> Dict[str, Optional[np.ndarray]]:
        return {
            s["name"]: None if s["marginalised_errors"] is None
            else np.array(s["marginalised_errors"], dtype=np.float64)
            for s in self.document["sets"]
        }

    @property
    def parameter_covariance(self) -> Dict[str, Optional[np.ndarray]]:
        return {
            s["name"]: None if s["parameter_covariance"] is None
            else np.array(s["parameter_covariance"], dtype=np.float64)
            for s in self.document["sets"]
        }

    def to_dict(self) -> Dict[str, Any]:
        return json.loads(json.dumps(self.document))


Derivatives = Union[
    Sequence[Tuple[str, float, Any, Any]],
    Mapping[str, Tuple[float, Any, Any]],
]


def forecast(
    fiducial: Any,
    labels: Sequence[str],
    derivatives: Derivatives,
    *,
    scales_arcmin: Optional[Sequence[Optional[float]]] = None,
    paired: bool = False,
    fiducial_values: Optional[Mapping[str, float]] = None,
    scale_min_arcmin: Optional[float] = None,
    scale_max_arcmin: Optional[float] = None,
    settings: Any = None,
    threads: Optional[int] = None,
) -> Forecast:
    """Fisher forecasts of the statistic sets (the ``forecast`` command) from arrays.

    ``fiducial``: (simulations × statistics) array for the covariance (Hartlap-corrected);
    ``labels``: the column names (an ensemble table's, e.g. from :func:`read_table`), which
    select the sets by prefix; ``derivatives``: (name, step, plus, minus) tuples, or a dict
    name → (step, plus, minus), with plus/minus the ensembles at θ ± step; ``paired``: the ±
    ensembles share seeds row by row; ``scales_arcmin``: each column's angular scale, for the
    scale cuts ``scale_min_arcmin`` / ``scale_max_arcmin``; ``fiducial_values``: centres
    (default 0); ``settings``: what the document records under "settings" (JSON-able).
    """
    fid = _real_array(fiducial, "the fiducial ensemble", 2)
    items = list(derivatives.items()) if isinstance(derivatives, Mapping) else list(derivatives)
    triples = []
    for item in items:
        if isinstance(derivatives, Mapping):
            name, (step, plus, minus) = item
        else:
            name, step, plus, minus = item
        triples.append((
            str(name), float(step),
            _real_array(plus, f"the +step ensemble of '{name}'", 2),
            _real_array(minus, f"the −step ensemble of '{name}'", 2),
        ))
    names = [t[0] for t in triples]
    values = dict(fiducial_values or {})
    unknown = [k for k in values if k not in names]
    if unknown:
        raise ValueError(f"fiducial value of '{unknown[0]}', which is not a parameter "
                         f"(parameters: {', '.join(names)})")
    centre = [float(values.get(n, 0.0)) for n in names]
    document, csv, text, warning, fisher = _native.forecast(
        fid, [str(l) for l in labels],
        None if scales_arcmin is None else [None if s is None else float(s) for s in scales_arcmin],
        triples, bool(paired), centre, scale_min_arcmin, scale_max_arcmin,
        json.dumps(settings), threads,
    )
    return Forecast(
        json.loads(document), csv, text, warning,
        {n: None if f is None else np.array(f, dtype=np.float64) for n, f in fisher},
    )


def read_map(path: Any, column: Union[int, str] = 0, *, with_header: bool = False) -> Any:
    """One column of a HEALPix FITS file through the library's reader (every header check of
    the command line): float64 values in the file's ordering, UNSEEN at bad pixels. With
    ``with_header``, also a dict (nside, ordering, coordsys, columns, warnings)."""
    values, nside, ordering, coordsys, columns, warnings = _native.read_map(
        str(path), str(column), False)
    if not with_header:
        return values
    return values, {"nside": nside, "ordering": ordering, "coordsys": coordsys,
                    "columns": columns, "warnings": warnings}


def read_mask(path: Any, column: Union[int, str] = 0, *, with_header: bool = False) -> Any:
    """One column of a HEALPix FITS file as a mask or weight map (values in [0, 1]; bad values
    weigh 0), through the library's reader."""
    values, nside, ordering, coordsys, columns, warnings = _native.read_map(
        str(path), str(column), True)
    if not with_header:
        return values
    return values, {"nside": nside, "ordering": ordering, "coordsys": coordsys,
                    "columns": columns, "warnings": warnings}


def write_map(
    path: Any,
    map: Any,
    *,
    ordering: str = "RING",
    column_names: Union[str, Sequence[str]] = "SIGNAL",
    float32: bool = False,
    coordsys: Optional[str] = None,
) -> None:
    """Writes a map (1-D) or maps (2-D, one per row) as one HEALPix FITS file through the
    library's writer (atomic: a temporary file renamed into place)."""
    array = np.asarray(map)
    rows = [array] if array.ndim == 1 else list(array)
    if array.ndim not in (1, 2):
        raise ValueError(f"a map must be 1-D (or 2-D for several columns), got shape {array.shape}")
    names = [column_names] if isinstance(column_names, str) else list(column_names)
    if len(names) != len(rows):
        raise ValueError(f"{len(rows)} maps but {len(names)} column names")
    columns = [(n, _real_array(r, f"column '{n}'", 1)) for n, r in zip(names, rows)]
    _native.write_map(str(path), columns, ordering, bool(float32), coordsys)


@dataclass
class Table:
    """An ensemble table: ``values`` (members × statistics), ``labels`` (column names) and
    ``scales_arcmin`` (each column's angular scale, None where it has none)."""

    values: np.ndarray
    labels: List[str]
    scales_arcmin: List[Optional[float]]


def read_table(directory: Any) -> Table:
    """The merged table of an ensemble directory (its rows checked as ``merge`` checks them),
    without writing anything."""
    values, labels, scales = _native.merge(str(directory), False)
    return Table(values, labels, scales)


def merge(directory: Any) -> Table:
    """Joins the rows of a (sharded) ensemble into ``statistics.npy`` + ``.json`` + ``.csv``,
    as the ``merge`` command does, and returns the table."""
    values, labels, scales = _native.merge(str(directory), True)
    return Table(values, labels, scales)


def ensemble(
    output_dir: Any,
    *,
    maps: Optional[str] = None,
    map_list: Any = None,
    simulate: Any = None,
    column: Union[int, str, None] = None,
    mask: Any = None,
    mask_column: Union[int, str, None] = None,
    taper: Optional[str] = None,
    taper_arcmin: Optional[float] = None,
    scales: Optional[int] = None,
    orientations: Optional[int] = None,
    tile_pixels: Optional[int] = None,
    coarse_nside: Optional[int] = None,
    pixel_arcmin: Optional[float] = None,
    border_pixels: Optional[int] = None,
    sampling: Optional[str] = None,
    spectrum_bins: Optional[int] = None,
    bispectrum: bool = True,
    settings: Any = None,
    cl_bin_width: Optional[int] = None,
    shard: Optional[Union[str, Tuple[int, int]]] = None,
    threads: Optional[int] = None,
) -> None:
    """Measures (a shard of) an ensemble into ``output_dir``, exactly as the ``ensemble``
    command does with the same options (files: ``maps`` glob, ``map_list``; or ``simulate``
    a recipe TOML). ``shard`` = (index, count) or "index/count" measures that part only;
    shards may run side by side (processes, Dask workers, SLURM array tasks); then
    :func:`merge` writes the table. Without ``shard``, SLURM_ARRAY_TASK_ID/COUNT are used
    when set, as on the command line."""
    args: List[str] = ["--output-dir", str(output_dir), "--quiet"]

    def add(flag: str, value: Any) -> None:
        if value is not None:
            args.extend([flag, str(value)])

    add("--maps", maps)
    add("--map-list", map_list)
    add("--simulate", simulate)
    add("--column", column)
    add("--mask", mask)
    add("--mask-column", mask_column)
    add("--taper", taper)
    add("--taper-arcmin", taper_arcmin)
    add("--settings", settings)
    add("--scales", scales)
    add("--orientations", orientations)
    add("--tile-pixels", tile_pixels)
    add("--coarse-nside", coarse_nside)
    add("--pixel-arcmin", pixel_arcmin)
    add("--border-pixels", border_pixels)
    add("--sampling", sampling)
    add("--spectrum-bins", spectrum_bins)
    add("--cl-bin-width", cl_bin_width)
    if not bispectrum:
        args.append("--no-bispectrum")
    if shard is not None:
        add("--shard", shard if isinstance(shard, str) else f"{shard[0]}/{shard[1]}")
    _native.ensemble_command(args, threads)
