"""Type stubs of the compiled module `planisphere._native` (the Rust binding). Use the
functions of `planisphere` itself: they check dtypes and shapes and wrap the results."""

from typing import List, Optional, Sequence, Tuple

import numpy as np
import numpy.typing as npt

__version__: str
UNSEEN: float

F64Array1 = npt.NDArray[np.float64]
F64Array2 = npt.NDArray[np.float64]
# document, vector, labels, scales, warnings, and the addresses of the values the first and
# the second map were measured from (arrays only: the caller's buffers when read in place)
MeasureOutput = Tuple[
    str,
    List[float],
    List[str],
    List[Optional[float]],
    List[str],
    Tuple[Optional[int], Optional[int]],
]

def measure_map(
    values: Optional[F64Array1],
    path: Optional[str],
    column: str,
    ordering_name: str,
    mask: Optional[F64Array1],
    mask_path: Optional[str],
    mask_column: str,
    name: str,
    mask_name: Optional[str],
    cross: Optional[F64Array1],
    cross_path: Optional[str],
    cross_column: str,
    cross_mask: Optional[F64Array1],
    cross_mask_path: Optional[str],
    cross_mask_column: str,
    cross_name: str,
    cross_mask_name: Optional[str],
    allow_coordsys_mismatch: bool,
    taper: str,
    taper_arcmin: float,
    scales: Optional[int],
    orientations: Optional[int],
    tile_pixels: Optional[int],
    coarse_nside: Optional[int],
    pixel_arcmin: Optional[float],
    border_pixels: Optional[int],
    sampling_name: Optional[str],
    spectrum_bins: Optional[int],
    bispectrum: bool,
    full_resolution: bool,
    threads: Optional[int],
) -> MeasureOutput: ...
def measure_flat(
    field: F64Array2,
    pixel_arcmin: float,
    mask: Optional[F64Array2],
    name: str,
    mask_name: Optional[str],
    scales: Optional[int],
    orientations: Optional[int],
    spectrum_bins: Optional[int],
    bispectrum: bool,
    full_resolution: bool,
    threads: Optional[int],
) -> MeasureOutput: ...
def sky(
    nside: int,
    count: int,
    first_index: int,
    seed: int,
    model_variance: float,
    cl: Optional[F64Array1],
    lmax: Optional[int],
    lognormal_shift: Optional[float],
    gaussian_spectrum: bool,
    beam_arcmin: Optional[float],
    noise_sigma: Optional[float],
    shape_noise: Optional[Tuple[float, float]],
    threads: Optional[int],
) -> F64Array2: ...
def spectra(
    values: F64Array1,
    ordering_name: str,
    mask: Optional[F64Array1],
    name: str,
    cross: Optional[F64Array1],
    cross_name: str,
    taper: str,
    taper_arcmin: float,
    lmax: Optional[int],
    bin_width: int,
    bin_weighting: str,
    beam_arcmin: float,
    pixel_window: bool,
    iterations: int,
    threads: Optional[int],
) -> Tuple[str, str]: ...
def forecast(
    fiducial: F64Array2,
    labels: Sequence[str],
    scales: Optional[Sequence[Optional[float]]],
    derivatives: Sequence[Tuple[str, float, F64Array2, F64Array2]],
    paired: bool,
    fiducial_values: Sequence[float],
    scale_min_arcmin: Optional[float],
    scale_max_arcmin: Optional[float],
    settings_json: str,
    threads: Optional[int],
) -> Tuple[str, str, str, Optional[str], List[Tuple[str, Optional[List[List[float]]]]]]: ...
def read_map(
    path: str, column: str, as_mask: bool
) -> Tuple[F64Array1, int, str, Optional[str], List[str], List[str]]: ...
def write_map(
    path: str,
    columns: Sequence[Tuple[str, F64Array1]],
    ordering_name: str,
    float32: bool,
    coordsys: Optional[str],
) -> None: ...
def merge(directory: str, write: bool) -> Tuple[F64Array2, List[str], List[Optional[float]]]: ...
def ensemble_command(arguments: Sequence[str], threads: Optional[int]) -> None: ...
