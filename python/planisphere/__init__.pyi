"""Type stubs of `planisphere` (see the module's docstrings for what each function does)."""

from dataclasses import dataclass
from os import PathLike
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple, Union

import numpy as np
import numpy.typing as npt

__version__: str
UNSEEN: float

_Path = Union[str, PathLike[str]]
_Array = npt.ArrayLike
_Derivatives = Union[
    Sequence[Tuple[str, float, _Array, _Array]],
    Mapping[str, Tuple[float, _Array, _Array]],
]

class Measurement:
    coefficients: np.ndarray
    values: npt.NDArray[np.float64]
    trusted: npt.NDArray[np.bool_]
    band_powers: np.ndarray
    summary: Dict[str, Tuple[float, bool]]
    tile_power_spectrum: Dict[str, Any]
    tile_bispectrum: Optional[Dict[str, Any]]
    settings: Dict[str, Any]
    tiling: Dict[str, Any]
    vector: Optional[npt.NDArray[np.float64]]
    vector_labels: Optional[List[str]]
    vector_scales_arcmin: Optional[List[Optional[float]]]
    cross: Optional[Dict[str, Any]]
    cross_coefficients: Optional[np.ndarray]
    # the map arrays ("map", "second map") copied before measuring because they were not
    # C-contiguous native float64; the others were read in place
    copied_maps: List[str]
    def summary_values(self) -> npt.NDArray[np.float64]: ...
    def to_dict(self) -> Dict[str, Any]: ...
    def to_json(self, indent: Optional[int] = 2) -> str: ...

@dataclass
class Spectra:
    document: Dict[str, Any]
    csv: str
    cl: npt.NDArray[np.float64]
    bins: np.ndarray
    def to_dict(self) -> Dict[str, Any]: ...

@dataclass
class Forecast:
    document: Dict[str, Any]
    table_csv: str
    table_text: str
    warning: Optional[str]
    fisher: Dict[str, Optional[npt.NDArray[np.float64]]]
    @property
    def parameters(self) -> List[str]: ...
    @property
    def errors(self) -> Dict[str, Optional[npt.NDArray[np.float64]]]: ...
    @property
    def parameter_covariance(self) -> Dict[str, Optional[npt.NDArray[np.float64]]]: ...
    def to_dict(self) -> Dict[str, Any]: ...

@dataclass
class Table:
    values: npt.NDArray[np.float64]
    labels: List[str]
    scales_arcmin: List[Optional[float]]

# A C-contiguous native float64 map array is read in place (no copy); any other is converted
# once (named in `Measurement.copied_maps`). Mask arrays are copied once, into the weights
# the library tapers.
def measure(
    map: Union[_Array, _Path],
    mask: Union[_Array, _Path, None] = None,
    *,
    ordering: str = "RING",
    column: Union[int, str] = 0,
    mask_column: Union[int, str] = 0,
    cross: Union[_Array, _Path, None] = None,
    cross_mask: Union[_Array, _Path, None] = None,
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
) -> Measurement: ...
def measure_flat(
    field: _Array,
    pixel_arcmin: float,
    mask: Optional[_Array] = None,
    *,
    scales: Optional[int] = None,
    orientations: Optional[int] = None,
    spectrum_bins: Optional[int] = None,
    bispectrum: bool = True,
    full_resolution: bool = False,
    threads: Optional[int] = None,
    name: str = "field",
    mask_name: Optional[str] = None,
) -> Measurement: ...
def sky(
    nside: int = 128,
    *,
    count: Optional[int] = None,
    first_index: int = 0,
    seed: int = 1,
    model_variance: float = 1e-4,
    cl: Optional[_Array] = None,
    lmax: Optional[int] = None,
    lognormal_shift: Optional[float] = None,
    gaussian_spectrum: bool = False,
    beam_arcmin: Optional[float] = None,
    noise_sigma: Optional[float] = None,
    shape_noise: Optional[Tuple[float, float]] = None,
    threads: Optional[int] = None,
) -> npt.NDArray[np.float64]: ...
def spectra(
    map: _Array,
    mask: Optional[_Array] = None,
    *,
    ordering: str = "RING",
    cross: Optional[_Array] = None,
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
) -> Spectra: ...
def forecast(
    fiducial: _Array,
    labels: Sequence[str],
    derivatives: _Derivatives,
    *,
    scales_arcmin: Optional[Sequence[Optional[float]]] = None,
    paired: bool = False,
    fiducial_values: Optional[Mapping[str, float]] = None,
    scale_min_arcmin: Optional[float] = None,
    scale_max_arcmin: Optional[float] = None,
    settings: Any = None,
    threads: Optional[int] = None,
) -> Forecast: ...
def read_map(path: _Path, column: Union[int, str] = 0, *, with_header: bool = False) -> Any: ...
def read_mask(path: _Path, column: Union[int, str] = 0, *, with_header: bool = False) -> Any: ...
def write_map(
    path: _Path,
    map: _Array,
    *,
    ordering: str = "RING",
    column_names: Union[str, Sequence[str]] = "SIGNAL",
    float32: bool = False,
    coordsys: Optional[str] = None,
) -> None: ...
def read_table(directory: _Path) -> Table: ...
def merge(directory: _Path) -> Table: ...
def ensemble(
    output_dir: _Path,
    *,
    maps: Optional[str] = None,
    map_list: Optional[_Path] = None,
    simulate: Optional[_Path] = None,
    column: Union[int, str, None] = None,
    mask: Optional[_Path] = None,
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
    settings: Optional[_Path] = None,
    cl_bin_width: Optional[int] = None,
    shard: Optional[Union[str, Tuple[int, int]]] = None,
    threads: Optional[int] = None,
) -> None: ...
