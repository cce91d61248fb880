//! `planisphere._native`: the library's job through numpy arrays. Every function here calls
//! the same library functions as the command line (see `src/cli/*.rs` of the library), so the
//! same inputs give bitwise the same numbers; the Python package `planisphere` wraps these
//! functions with docstrings, dtype handling and result objects.
//!
//! Manners: arguments are checked (and, where a library function needs owned values, copied)
//! while the interpreter is held, then the interpreter is released (`Python::detach`) for the
//! computation; `measure` reads its map arrays in place, their read-only borrows held across
//! the release; `threads = n` runs the
//! computation in a local rayon pool of n threads (no global state), otherwise in rayon's
//! global pool (RAYON_NUM_THREADS). Library errors become `OSError` (files) or `ValueError`
//! (everything else) with the library's one-line message.

use numpy::{
    IntoPyArray, PyArray1, PyArray2, PyArrayMethods, PyReadonlyArray1, PyReadonlyArray2,
    PyUntypedArrayMethods,
};
use planisphere::forecast::named_sets::{check_sets_forecast, forecast_document, forecast_sets};
use planisphere::forecast::{ColumnLabel, DerivativeEnsembles, Ensemble, ScaleCut};
use planisphere::harmonics::mode_coupling::BinWeighting;
use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::measure::settings::MeasurementChoices;
use planisphere::simulate::skies::{SkyOptions, SpectrumChoice};
use planisphere::sky::apodization::TaperKind;
use planisphere::sky::footprint::refuse_single_pixel_mask;
use planisphere::sky::measurable::check_measurable;
use planisphere::tiles::sampling::SamplingMethod;
use planisphere::{Error, Footprint, FootprintOf, Ordering, Pixelization, SkyMap, SkyMapOf};
use pyo3::exceptions::{PyOSError, PyValueError};
use pyo3::prelude::*;
use std::path::{Path, PathBuf};

/// A library error as the Python exception of its kind, with the library's one-line message.
fn py_error(e: Error) -> PyErr {
    match e {
        Error::Io { .. } | Error::Fits { .. } => PyOSError::new_err(e.to_string()),
        _ => PyValueError::new_err(e.to_string()),
    }
}

fn value_error(message: String) -> PyErr {
    PyValueError::new_err(message)
}

/// Runs `work` on `threads` threads (a local pool) or in rayon's global pool.
fn on_threads<T: Send>(
    threads: Option<i64>,
    work: impl FnOnce() -> planisphere::Result<T> + Send,
) -> planisphere::Result<T> {
    match threads {
        None => work(),
        Some(n) if (1..=1024).contains(&n) => rayon::ThreadPoolBuilder::new()
            .num_threads(n as usize)
            .build()
            .map_err(|e| Error::Setting(format!("cannot start {n} threads: {e}")))?
            .install(work),
        Some(n) => Err(Error::Setting(format!(
            "threads must be from 1 to 1024, got {n}"
        ))),
    }
}

/// A whole number ≥ `min` given to `name`, or a ValueError.
fn count(name: &str, value: i64, min: i64) -> PyResult<usize> {
    if value < min {
        return Err(value_error(format!(
            "{name} must be a whole number >= {min}, got {value}"
        )));
    }
    usize::try_from(value).map_err(|_| value_error(format!("{name} is too large: {value}")))
}

fn ordering(text: &str) -> PyResult<Ordering> {
    match text.trim().to_ascii_uppercase().as_str() {
        "RING" => Ok(Ordering::Ring),
        "NESTED" | "NEST" => Ok(Ordering::Nested),
        _ => Err(value_error(format!(
            "ordering must be 'RING' or 'NESTED', got '{text}'"
        ))),
    }
}

/// The pixelization of a full-sky map of `npix` pixels: NSIDE from npix = 12·NSIDE².
fn pixelization_of(npix: usize, order: Ordering, what: &str) -> PyResult<Pixelization> {
    let nside = ((npix / 12) as f64).sqrt().round() as u64;
    if npix == 0 || 12 * nside * nside != npix as u64 || nside > u32::MAX as u64 {
        return Err(value_error(format!(
            "{what} has {npix} values, not a full-sky HEALPix map (12·NSIDE² values)"
        )));
    }
    Pixelization::new(nside as u32, order).map_err(py_error)
}

fn enum_value<T: clap::ValueEnum>(name: &str, text: &str) -> PyResult<T> {
    T::from_str(text, true).map_err(|_| {
        let names: Vec<String> = T::value_variants()
            .iter()
            .filter_map(|v| v.to_possible_value().map(|p| p.get_name().to_string()))
            .collect();
        value_error(format!(
            "{name} must be one of {}; got '{text}'",
            names.join(", ")
        ))
    })
}

/// The sampling method named `text` (its kebab-case name, any case, surrounding blanks
/// ignored), or a ValueError listing the names.
fn sampling(text: &str) -> PyResult<SamplingMethod> {
    <SamplingMethod as clap::ValueEnum>::from_str(text.trim(), true)
        .or_else(|_| enum_value("sampling", text))
}

/// The measurement settings of `measure`'s options: the Python keywords as the library's
/// measurement choices, resolved over [`MeasurementSettings::default`] as the command line
/// resolves its flags (checked later by the one validation, as the commands check them).
#[allow(clippy::too_many_arguments)]
fn settings(
    scales: Option<i64>,
    orientations: Option<i64>,
    tile_pixels: Option<i64>,
    coarse_nside: Option<i64>,
    pixel_arcmin: Option<f64>,
    border_pixels: Option<i64>,
    sampling_name: Option<&str>,
    spectrum_bins: Option<i64>,
    bispectrum: bool,
    full_resolution: bool,
) -> PyResult<MeasurementSettings> {
    let whole = |name: &str, v: Option<i64>| v.map(|v| count(name, v, 0)).transpose();
    let choices = MeasurementChoices {
        scales: whole("scales", scales)?,
        orientations: whole("orientations", orientations)?,
        tile_pixels: whole("tile_pixels", tile_pixels)?,
        coarse_nside: whole("coarse_nside", coarse_nside)?
            .map(|v| {
                u32::try_from(v)
                    .map_err(|_| value_error(format!("coarse_nside is too large: {v}")))
            })
            .transpose()?,
        pixel_arcmin,
        border_pixels: whole("border_pixels", border_pixels)?,
        sampling: sampling_name.map(sampling).transpose()?,
        spectrum_bins: whole("spectrum_bins", spectrum_bins)?,
        bispectrum: Some(bispectrum),
    };
    let mut s = choices.resolve(MeasurementSettings::default());
    if full_resolution {
        s.transform.fourier_cropping = false;
    }
    Ok(s)
}

/// A contiguous view of a 1-D float64 array, or a ValueError naming `what`.
fn slice<'a>(array: &'a PyReadonlyArray1<'_, f64>, what: &str) -> PyResult<&'a [f64]> {
    array
        .as_slice()
        .map_err(|_| value_error(format!("{what} must be a contiguous array")))
}

/// A map from a 1-D array in the given ordering (one copy: this map owns its values, for the
/// library functions that take an owned map; `measure` reads the array in place instead).
fn sky_map(values: &PyReadonlyArray1<'_, f64>, order: Ordering, what: &str) -> PyResult<SkyMap> {
    let v = slice(values, what)?;
    let pix = pixelization_of(v.len(), order, what)?;
    SkyMap::new(pix, v.to_vec()).map_err(py_error)
}

/// A map given as an array (read in place, not copied: the caller's array outlives the
/// computation) or as a FITS file and column, read with the library's reader (exactly as the
/// command line reads it).
enum MapInput<'a> {
    Array(Pixelization, &'a [f64]),
    File(PathBuf, planisphere::io::fits_io::ColumnChoice),
}

impl<'a> MapInput<'a> {
    fn new(
        values: Option<&'a PyReadonlyArray1<'_, f64>>,
        path: Option<PathBuf>,
        column: &str,
        order: Ordering,
        what: &str,
    ) -> PyResult<Option<Self>> {
        match (values, path) {
            (Some(v), None) => {
                let v = slice(v, what)?;
                let pix = pixelization_of(v.len(), order, what)?;
                Ok(Some(MapInput::Array(pix, v)))
            }
            (None, Some(p)) => Ok(Some(MapInput::File(
                p,
                planisphere::io::fits_io::ColumnChoice::parse(column),
            ))),
            (None, None) => Ok(None),
            (Some(_), Some(_)) => Err(value_error(format!("{what}: an array or a file, not both"))),
        }
    }

    /// NSIDE without reading the pixels (for the memory estimate).
    fn nside(&self) -> planisphere::Result<u32> {
        match self {
            MapInput::Array(pix, _) => Ok(pix.nside()),
            MapInput::File(p, _) => Ok(planisphere::io::fits_io::HealpixFitsReader::open(p)?
                .header()
                .nside),
        }
    }

    /// The map (borrowing an array's values), and the reader's warnings (an assumed
    /// ordering, ...).
    fn load(self) -> planisphere::Result<(SkyMapOf<'a>, Vec<String>)> {
        match self {
            MapInput::Array(pix, values) => Ok((SkyMapOf::borrowing(pix, values)?, Vec::new())),
            MapInput::File(p, c) => {
                let (map, header) = planisphere::io::fits_io::read_map(&p, &c)?;
                let warnings = header
                    .warnings
                    .iter()
                    .map(|w| format!("{}: {w}", p.display()))
                    .collect();
                Ok((map, warnings))
            }
        }
    }
}

/// A mask given as weights (same ordering as the map; the footprint reads them in place and
/// stores only the weights it changes, such as the tapered band along the edges) or as a FITS
/// file and column.
enum MaskInput<'a> {
    Weights(&'a [f64]),
    File(PathBuf, planisphere::io::fits_io::ColumnChoice),
}

impl<'a> MaskInput<'a> {
    fn new(
        values: Option<&'a PyReadonlyArray1<'_, f64>>,
        path: Option<PathBuf>,
        column: &str,
        what: &str,
    ) -> PyResult<Option<Self>> {
        match (values, path) {
            (Some(v), None) => Ok(Some(MaskInput::Weights(slice(v, what)?))),
            (None, Some(p)) => Ok(Some(MaskInput::File(
                p,
                planisphere::io::fits_io::ColumnChoice::parse(column),
            ))),
            (None, None) => Ok(None),
            (Some(_), Some(_)) => Err(value_error(format!("{what}: an array or a file, not both"))),
        }
    }
}

/// The untapered footprint of `map` named `name`: the weights (same ordering as the map; NaN
/// and UNSEEN weigh 0, as in a FITS mask), a mask file (brought to the map's ordering, its
/// COORDSYS compared with the map's unless `allow_coordsys_mismatch`) or the map's valid
/// pixels, without the map's bad pixels. At most one full-sky array of weights: the caller's
/// weights are read in place, a mask file's copy is restricted to the map in place.
fn untapered<'m>(
    map: &SkyMapOf<'_>,
    name: &str,
    mask: Option<MaskInput<'m>>,
    allow_coordsys_mismatch: bool,
    warnings: &mut Vec<String>,
) -> planisphere::Result<FootprintOf<'m>> {
    if map.valid_count() == 0 {
        return Err(Error::Data(format!(
            "{name}: every pixel is bad (UNSEEN or NaN): nothing to measure"
        )));
    }
    let raw = match mask {
        Some(MaskInput::Weights(w)) => FootprintOf::borrowing(map.pixelization(), w)?,
        Some(MaskInput::File(path, column)) => {
            let (fp, header) = planisphere::io::fits_io::read_footprint(&path, &column)?;
            warnings.extend(
                header
                    .warnings
                    .iter()
                    .map(|w| format!("{}: {w}", path.display())),
            );
            planisphere::io::fits_io::check_same_coordsys(
                (name, map.coordsys.as_deref()),
                (&path.display().to_string(), header.coordsys.as_deref()),
                allow_coordsys_mismatch,
            )?;
            fp
        }
        None => return Footprint::of_valid_pixels(map).restricted_to(map),
    };
    let fp = raw.into_restricted_to(map)?;
    refuse_single_pixel_mask(&fp)?;
    Ok(fp)
}

/// What a measurement hands back to Python: the JSON document as text, the statistics vector
/// (the row an ensemble table holds, without its pseudo-C_ℓ columns), its labels and scales,
/// the reader's warnings, and the addresses of the values the maps were measured from (the
/// first map and the second, when given as arrays: the caller's own buffers when they were
/// read in place).
type MeasureOutput = (
    String,
    Vec<f64>,
    Vec<String>,
    Vec<Option<f64>>,
    Vec<String>,
    (Option<usize>, Option<usize>),
);

/// Measures a HEALPix map (and optionally a second one, for cross statistics) as `measure`
/// does; maps and masks come as arrays or as FITS files. See the Python wrapper
/// `planisphere.measure` for the arguments.
#[pyfunction]
#[pyo3(signature = (values, path, column, ordering_name, mask, mask_path, mask_column, name,
    mask_name, cross, cross_path, cross_column, cross_mask, cross_mask_path, cross_mask_column,
    cross_name, cross_mask_name, allow_coordsys_mismatch, taper, taper_arcmin, scales,
    orientations, tile_pixels, coarse_nside, pixel_arcmin, border_pixels, sampling_name,
    spectrum_bins, bispectrum, full_resolution, threads))]
#[allow(clippy::too_many_arguments)]
fn measure_map<'py>(
    py: Python<'py>,
    values: Option<PyReadonlyArray1<'py, f64>>,
    path: Option<PathBuf>,
    column: &str,
    ordering_name: &str,
    mask: Option<PyReadonlyArray1<'py, f64>>,
    mask_path: Option<PathBuf>,
    mask_column: &str,
    name: String,
    mask_name: Option<String>,
    cross: Option<PyReadonlyArray1<'py, f64>>,
    cross_path: Option<PathBuf>,
    cross_column: &str,
    cross_mask: Option<PyReadonlyArray1<'py, f64>>,
    cross_mask_path: Option<PathBuf>,
    cross_mask_column: &str,
    cross_name: String,
    cross_mask_name: Option<String>,
    allow_coordsys_mismatch: bool,
    taper: &str,
    taper_arcmin: f64,
    scales: Option<i64>,
    orientations: Option<i64>,
    tile_pixels: Option<i64>,
    coarse_nside: Option<i64>,
    pixel_arcmin: Option<f64>,
    border_pixels: Option<i64>,
    sampling_name: Option<&str>,
    spectrum_bins: Option<i64>,
    bispectrum: bool,
    full_resolution: bool,
    threads: Option<i64>,
) -> PyResult<MeasureOutput> {
    let order = ordering(ordering_name)?;
    let settings = settings(
        scales,
        orientations,
        tile_pixels,
        coarse_nside,
        pixel_arcmin,
        border_pixels,
        sampling_name,
        spectrum_bins,
        bispectrum,
        full_resolution,
    )?;
    let taper_kind: TaperKind = enum_value("taper", taper)?;
    // The arrays stay borrowed (read-only) here while the interpreter is released: the
    // computation reads them in place.
    let map = MapInput::new(values.as_ref(), path, column, order, "the map")?
        .ok_or_else(|| value_error("measure needs a map".into()))?;
    let mask = MaskInput::new(mask.as_ref(), mask_path, mask_column, "the mask")?;
    let other = MapInput::new(
        cross.as_ref(),
        cross_path,
        cross_column,
        order,
        "the second map",
    )?;
    let cross_mask = MaskInput::new(
        cross_mask.as_ref(),
        cross_mask_path,
        cross_mask_column,
        "the second mask",
    )?;
    py.detach(move || {
        on_threads(threads, move || {
            let maps = if other.is_some() { 2 } else { 1 };
            let nside = map.nside()?;
            planisphere::limits::check_memory(
                &format!("measuring a NSIDE {nside} map"),
                planisphere::limits::measurement_bytes(nside, maps),
            )?;
            let from_array = |m: &MapInput<'_>| matches!(m, MapInput::Array(..));
            let (first_array, second_array) = (from_array(&map), other.as_ref().is_some_and(from_array));
            let address = |m: &SkyMapOf<'_>, array: bool| array.then(|| m.values().as_ptr() as usize);
            let (map, mut warnings) = map.load()?;
            let taper_desc = planisphere::io::measurement_document::taper_description(
                taper_kind,
                taper_arcmin,
                mask_name.as_deref(),
            );
            let (measurer, doc, stats, second_address) = match other {
                None => {
                    let raw = untapered(&map, &name, mask, allow_coordsys_mismatch, &mut warnings)?;
                    let fp = planisphere::sky::apodization::taper_footprint(
                        raw,
                        taper_kind,
                        taper_arcmin,
                    )?;
                    check_measurable(&map, Some(&fp), &name)?;
                    let measurer = SphereMeasurer::new(map.pixelization(), &fp, settings)?;
                    let stats = measurer.measure(&map, &fp)?;
                    let doc = planisphere::io::measurement_document::measurement_document(
                        &measurer,
                        &stats,
                        &name,
                        &taper_desc,
                    );
                    (measurer, doc, stats, None)
                }
                Some(other) => {
                    let (other, more) = other.load()?;
                    warnings.extend(more);
                    if other.valid_count() == 0 {
                        return Err(Error::Data(format!(
                            "{cross_name}: every pixel is bad (UNSEEN or NaN): nothing to cross-correlate"
                        )));
                    }
                    if other.nside() != map.nside() {
                        return Err(Error::Mismatch(format!(
                            "{name} has NSIDE {} but {cross_name} has NSIDE {}: cross statistics need one pixelization",
                            map.nside(),
                            other.nside()
                        )));
                    }
                    planisphere::io::fits_io::check_same_coordsys(
                        (&name, map.coordsys.as_deref()),
                        (&cross_name, other.coordsys.as_deref()),
                        allow_coordsys_mismatch,
                    )?;
                    let other = other.to_ordering(map.ordering())?;
                    let first =
                        untapered(&map, &name, mask, allow_coordsys_mismatch, &mut warnings)?;
                    let second = untapered(
                        &other,
                        &cross_name,
                        cross_mask,
                        allow_coordsys_mismatch,
                        &mut warnings,
                    )
                    .map_err(|e| match e {
                        Error::Data(m) => Error::Data(format!("second map: {m}")),
                        e => e,
                    })?;
                    let fp = planisphere::sky::apodization::taper_footprint(
                        first.intersection(&second)?,
                        taper_kind,
                        taper_arcmin,
                    )?;
                    check_measurable(&map, Some(&fp), &name)?;
                    check_measurable(&other, Some(&fp), &cross_name)?;
                    let measurer = SphereMeasurer::new(map.pixelization(), &fp, settings)?;
                    let pair = measurer.measure_pair(&map, &other, &fp)?;
                    let doc = planisphere::io::measurement_document::pair_document(
                        &measurer,
                        &pair,
                        &name,
                        &cross_name,
                        cross_mask_name.as_deref().map(Path::new),
                        &taper_desc,
                    );
                    (measurer, doc, pair.first, address(&other, second_array))
                }
            };
            let labels = measurer.vector_labels();
            Ok((
                doc.to_string(),
                stats.vector(),
                labels.iter().map(|l| l.name.clone()).collect(),
                labels.iter().map(|l| l.scale_arcmin).collect(),
                warnings,
                (address(&map, first_array), second_address),
            ))
        })
    })
    .map_err(py_error)
}

/// Measures a flat field as one periodic or masked tile, as `measure FIELD.npy` does.
#[pyfunction]
#[pyo3(signature = (field, pixel_arcmin, mask, name, mask_name, scales, orientations,
    spectrum_bins, bispectrum, full_resolution, threads))]
#[allow(clippy::too_many_arguments)]
fn measure_flat<'py>(
    py: Python<'py>,
    field: PyReadonlyArray2<'py, f64>,
    pixel_arcmin: f64,
    mask: Option<PyReadonlyArray2<'py, f64>>,
    name: String,
    mask_name: Option<String>,
    scales: Option<i64>,
    orientations: Option<i64>,
    spectrum_bins: Option<i64>,
    bispectrum: bool,
    full_resolution: bool,
    threads: Option<i64>,
) -> PyResult<MeasureOutput> {
    let settings = settings(
        scales,
        orientations,
        None,
        None,
        Some(pixel_arcmin),
        None,
        None,
        spectrum_bins,
        bispectrum,
        full_resolution,
    )?;
    settings.validate().map_err(py_error)?;
    let shape = field.shape();
    let (rows, cols) = (shape[0], shape[1]);
    planisphere::measure::flat::check_field_shape(rows, cols)
        .map_err(|e| value_error(format!("{name}: {e}")))?;
    let values = field
        .as_slice()
        .map_err(|_| value_error("the field must be a contiguous array".into()))?
        .to_vec();
    let mask = match &mask {
        Some(m) => {
            if m.shape() != [rows, cols] {
                return Err(value_error(format!(
                    "the mask is {} × {} but the field is {rows} × {cols}",
                    m.shape()[0],
                    m.shape()[1]
                )));
            }
            Some(
                m.as_slice()
                    .map_err(|_| value_error("the mask must be a contiguous array".into()))?
                    .to_vec(),
            )
        }
        None => None,
    };
    let mask_label = mask_name.clone().unwrap_or_else(|| "the mask".into());
    py.detach(move || {
        on_threads(threads, move || {
            let n = rows;
            if let Some(m) = &mask {
                planisphere::measure::flat::check_mask(&mask_label, m, n)?;
            }
            let values = planisphere::measure::flat::field_values(&name, values, mask.as_deref())?;
            let pixel = (pixel_arcmin / 60.0).to_radians();
            let mut map = planisphere::measure::flat::FlatMap::new(n, pixel, values)?;
            if let Some(m) = &mask {
                map = map.with_mask(m.clone(), None)?;
            }
            let stats = planisphere::measure::flat::measure(&map, &settings)?;
            let doc = planisphere::io::measurement_document::flat_measurement_document(
                &stats,
                &settings,
                &name,
                n,
                pixel_arcmin,
                mask.as_deref(),
                mask_name.as_deref(),
            );
            // (the column labels of the vector belong to the sphere measurer; a flat field's
            // coefficients are labelled in the document)
            Ok((
                doc.to_string(),
                stats.vector(),
                Vec::new(),
                Vec::new(),
                Vec::new(),
                (None, None),
            ))
        })
    })
    .map_err(py_error)
}

/// Simulated skies as `sky` makes them: a (count × npix) float64 array in RING order.
#[pyfunction]
#[pyo3(signature = (nside, count, first_index, seed, model_variance, cl, lmax, lognormal_shift,
    gaussian_spectrum, beam_arcmin, noise_sigma, shape_noise, threads))]
#[allow(clippy::too_many_arguments)]
fn sky<'py>(
    py: Python<'py>,
    nside: i64,
    count: i64,
    first_index: i64,
    seed: u64,
    model_variance: f64,
    cl: Option<PyReadonlyArray1<'py, f64>>,
    lmax: Option<i64>,
    lognormal_shift: Option<f64>,
    gaussian_spectrum: bool,
    beam_arcmin: Option<f64>,
    noise_sigma: Option<f64>,
    shape_noise: Option<(f64, f64)>,
    threads: Option<i64>,
) -> PyResult<Bound<'py, PyArray2<f64>>> {
    let nside_u = u32::try_from(nside).map_err(|_| {
        value_error(format!(
            "nside must be a power of two from 1 to 8192, got {nside}"
        ))
    })?;
    let options = SkyOptions {
        nside: nside_u,
        lmax: lmax.map(|l| self::count("lmax", l, 0)).transpose()?,
        spectrum: match &cl {
            Some(c) => SpectrumChoice::Table(slice(c, "cl")?.to_vec()),
            None => SpectrumChoice::Model {
                variance: model_variance,
            },
        },
        lognormal_shift,
        gaussian_spectrum,
        beam_arcmin,
        noise_sigma,
        shape_noise,
        seed,
        first_index: self::count("first_index", first_index, 0)? as u64,
        count: self::count("count", count, 1)? as u64,
    };
    let (values, rows, npix) = py
        .detach(move || {
            on_threads(threads, move || {
                let recipe = options.recipe()?;
                let sht = recipe.transform()?;
                let npix = 12 * (recipe.nside as usize).pow(2);
                let mut values = Vec::with_capacity(npix * options.count as usize);
                for k in 0..options.count {
                    let map = recipe.realise(&sht, options.first_index + k)?;
                    values.extend_from_slice(&map.into_values_with_sentinel());
                }
                Ok((values, options.count as usize, npix))
            })
        })
        .map_err(py_error)?;
    values.into_pyarray(py).reshape([rows, npix])
}

/// Pseudo-C_ℓ and MASTER band powers as `spectra` measures them: the `--json` document and
/// the `--csv` text.
#[pyfunction]
#[pyo3(signature = (values, ordering_name, mask, name, cross, cross_name, taper, taper_arcmin,
    lmax, bin_width, bin_weighting, beam_arcmin, pixel_window, iterations, threads))]
#[allow(clippy::too_many_arguments)]
fn spectra<'py>(
    py: Python<'py>,
    values: PyReadonlyArray1<'py, f64>,
    ordering_name: &str,
    mask: Option<PyReadonlyArray1<'py, f64>>,
    name: String,
    cross: Option<PyReadonlyArray1<'py, f64>>,
    cross_name: String,
    taper: &str,
    taper_arcmin: f64,
    lmax: Option<i64>,
    bin_width: i64,
    bin_weighting: &str,
    beam_arcmin: f64,
    pixel_window: bool,
    iterations: i64,
    threads: Option<i64>,
) -> PyResult<(String, String)> {
    let order = ordering(ordering_name)?;
    let taper_kind: TaperKind = enum_value("taper", taper)?;
    let master = planisphere::harmonics::spectra::MasterSettings {
        bin_width: count("bin_width", bin_width, 0)?,
        weighting: enum_value::<BinWeighting>("bin_weighting", bin_weighting)?,
        beam_fwhm_arcmin: beam_arcmin,
        pixel_window,
    };
    let lmax = lmax.map(|l| count("lmax", l, 0)).transpose()?;
    let iterations = count("iterations", iterations, 0)?;
    let map = sky_map(&values, order, "the map")?;
    let other = match &cross {
        Some(c) => Some(sky_map(c, order, "the second map")?),
        None => None,
    };
    let mask = match &mask {
        Some(m) => Some(slice(m, "the mask")?),
        None => None,
    };
    py.detach(move || {
        on_threads(threads, move || {
            master.check()?;
            planisphere::limits::check_harmonic_iterations(iterations)?;
            let raw = untapered(
                &map,
                &name,
                mask.map(MaskInput::Weights),
                false,
                &mut Vec::new(),
            )?;
            let fp = planisphere::sky::apodization::taper_footprint(raw, taper_kind, taper_arcmin)?;
            let (pseudo, s) = planisphere::harmonics::spectra::measure_spectra(
                (map, &name),
                other.as_ref().map(|o| (o, cross_name.as_str())),
                &fp,
                lmax,
                iterations,
                &master,
            )?;
            let doc = serde_json::to_string(
                &planisphere::harmonics::spectra::SpectraDocument::new(&pseudo, &s),
            )
            .map_err(|e| Error::Data(format!("cannot write the spectra document: {e}")))?;
            Ok((doc, planisphere::harmonics::spectra::spectrum_csv(&s)))
        })
    })
    .map_err(py_error)
}

/// An ensemble from a (simulations × statistics) array and its column labels.
fn ensemble(
    values: &PyReadonlyArray2<'_, f64>,
    labels: &[ColumnLabel],
    what: &str,
) -> PyResult<Ensemble> {
    let shape = values.shape();
    if shape[1] != labels.len() {
        return Err(value_error(format!(
            "{what} has {} columns but {} labels were given",
            shape[1],
            labels.len()
        )));
    }
    let flat = values
        .as_slice()
        .map_err(|_| value_error(format!("{what} must be a contiguous array")))?;
    let rows: Vec<Vec<f64>> = flat.chunks(shape[1].max(1)).map(<[f64]>::to_vec).collect();
    Ensemble::from_rows(labels.to_vec(), &rows).map_err(|e| value_error(format!("{what}: {e}")))
}

/// A derivative as Python gives it: parameter, step, ensemble at +step, ensemble at −step.
type DerivativeArrays<'py> = (
    String,
    f64,
    PyReadonlyArray2<'py, f64>,
    PyReadonlyArray2<'py, f64>,
);

/// What a forecast hands back: the JSON document, the CSV and text tables, a warning, and per
/// statistic set its Fisher matrix (None where the set failed).
type ForecastOutput = (
    String,
    String,
    String,
    Option<String>,
    Vec<(String, Option<Vec<Vec<f64>>>)>,
);

/// A Fisher forecast from arrays, as `forecast` makes it from ensemble directories: the JSON
/// document (with `settings` as given), the CSV table and the text table, and a warning when
/// some statistic sets failed.
#[pyfunction]
#[pyo3(signature = (fiducial, labels, scales, derivatives, paired, fiducial_values,
    scale_min_arcmin, scale_max_arcmin, settings_json, threads))]
#[allow(clippy::too_many_arguments)]
fn forecast<'py>(
    py: Python<'py>,
    fiducial: PyReadonlyArray2<'py, f64>,
    labels: Vec<String>,
    scales: Option<Vec<Option<f64>>>,
    derivatives: Vec<DerivativeArrays<'py>>,
    paired: bool,
    fiducial_values: Vec<f64>,
    scale_min_arcmin: Option<f64>,
    scale_max_arcmin: Option<f64>,
    settings_json: String,
    threads: Option<i64>,
) -> PyResult<ForecastOutput> {
    let scales = scales.unwrap_or_default();
    let column_labels: Vec<ColumnLabel> = labels
        .iter()
        .enumerate()
        .map(|(i, name)| match scales.get(i).copied().flatten() {
            Some(s) => ColumnLabel::with_scale(name.clone(), s),
            None => ColumnLabel::new(name.clone()),
        })
        .collect();
    for (k, (name, step, ..)) in derivatives.iter().enumerate() {
        if name.trim().is_empty() {
            return Err(value_error("a derivative needs a parameter name".into()));
        }
        if derivatives[..k].iter().any(|(other, ..)| other == name) {
            return Err(value_error(format!(
                "the derivatives name parameter '{name}' twice: give each parameter once"
            )));
        }
        if !(step.is_finite() && *step > 0.0) {
            return Err(value_error(format!(
                "the step of '{name}' must be positive, got {step}"
            )));
        }
    }
    if fiducial_values.len() != derivatives.len() {
        return Err(value_error(format!(
            "{} fiducial values for {} parameters",
            fiducial_values.len(),
            derivatives.len()
        )));
    }
    for (option, value) in [
        ("scale_min_arcmin", scale_min_arcmin),
        ("scale_max_arcmin", scale_max_arcmin),
    ] {
        if let Some(v) = value.filter(|v| v.is_nan() || *v < 0.0) {
            return Err(value_error(format!(
                "{option} is an angular scale in arcmin and cannot be negative, got {v}"
            )));
        }
    }
    let fid = ensemble(&fiducial, &column_labels, "the fiducial ensemble")?;
    let mut ders = Vec::with_capacity(derivatives.len());
    for (name, step, plus, minus) in &derivatives {
        ders.push(DerivativeEnsembles {
            parameter: name.clone(),
            step: *step,
            plus: ensemble(
                plus,
                &column_labels,
                &format!("the +step ensemble of '{name}'"),
            )?,
            minus: ensemble(
                minus,
                &column_labels,
                &format!("the −step ensemble of '{name}'"),
            )?,
            paired,
        });
    }
    let settings: serde_json::Value = serde_json::from_str(&settings_json)
        .map_err(|e| value_error(format!("settings must be JSON-serialisable: {e}")))?;
    py.detach(move || {
        on_threads(threads, move || {
            let cut = match (scale_min_arcmin, scale_max_arcmin) {
                (None, None) => None,
                (a, b) => Some(ScaleCut::new(a.unwrap_or(0.0), b.unwrap_or(f64::INFINITY))?),
            };
            // a pair ensemble's columns are those of map A (`a.`), map B and the cross terms
            let pairs = fid.labels().iter().any(|l| l.name.starts_with("a."));
            let result = forecast_sets(&fid, &ders, cut.as_ref(), pairs)?;
            let warning = check_sets_forecast(&result.comparison)?;
            let doc = forecast_document(&result, &fiducial_values, settings);
            let fisher = result
                .per_set
                .iter()
                .map(|(name, fc)| (name.clone(), fc.as_ref().map(|f| f.fisher.clone())))
                .collect();
            Ok((
                doc.to_string(),
                result.comparison.to_csv(),
                result.comparison.to_text(),
                warning,
                fisher,
            ))
        })
    })
    .map_err(py_error)
}

/// Reads one column of a HEALPix FITS map with the library's reader and its checks: the
/// values (UNSEEN at bad pixels), and the header's NSIDE, ordering, coordinate system,
/// column names and warnings.
#[pyfunction]
#[pyo3(signature = (path, column, as_mask))]
#[allow(clippy::type_complexity)]
fn read_map<'py>(
    py: Python<'py>,
    path: PathBuf,
    column: String,
    as_mask: bool,
) -> PyResult<(
    Bound<'py, PyArray1<f64>>,
    u32,
    String,
    Option<String>,
    Vec<String>,
    Vec<String>,
)> {
    let choice = planisphere::io::fits_io::ColumnChoice::parse(&column);
    let (values, header) = py
        .detach(|| -> planisphere::Result<_> {
            // the library's arrays become numpy's without a second full-sky copy
            if as_mask {
                let (fp, header) = planisphere::io::fits_io::read_footprint(&path, &choice)?;
                Ok((fp.into_weights(), header))
            } else {
                let (map, header) = planisphere::io::fits_io::read_map(&path, &choice)?;
                Ok((map.into_values_with_sentinel(), header))
            }
        })
        .map_err(py_error)?;
    let order = match header.ordering {
        Ordering::Ring => "RING",
        Ordering::Nested => "NESTED",
    };
    Ok((
        values.into_pyarray(py),
        header.nside,
        order.to_string(),
        header.coordsys.clone(),
        header.columns.iter().map(|c| c.name.clone()).collect(),
        header.warnings.clone(),
    ))
}

/// Writes maps as one HEALPix FITS file (one column each) with the library's writer: an
/// atomic write, the header of the HEALPix FITS convention.
#[pyfunction]
#[pyo3(signature = (path, columns, ordering_name, float32, coordsys))]
fn write_map<'py>(
    py: Python<'py>,
    path: PathBuf,
    columns: Vec<(String, PyReadonlyArray1<'py, f64>)>,
    ordering_name: &str,
    float32: bool,
    coordsys: Option<String>,
) -> PyResult<()> {
    let order = ordering(ordering_name)?;
    let mut maps = Vec::with_capacity(columns.len());
    for (name, values) in &columns {
        maps.push((
            name.clone(),
            sky_map(values, order, &format!("column '{name}'"))?,
        ));
    }
    let options = planisphere::io::fits_io::WriteOptions {
        precision: if float32 {
            planisphere::io::fits_io::ValuePrecision::Float32
        } else {
            planisphere::io::fits_io::ValuePrecision::Float64
        },
        coordsys,
        ..Default::default()
    };
    py.detach(move || {
        let refs: Vec<(&str, &SkyMap)> = maps.iter().map(|(n, m)| (n.as_str(), m)).collect();
        planisphere::io::fits_io::write_maps(&path, &refs, &options)
    })
    .map_err(py_error)
}

/// Merges the rows of an ensemble directory into its table (`statistics.npy`, `.json`,
/// `.csv`), as `merge` does; returns the table, its labels and the scale of each column.
#[pyfunction]
#[pyo3(signature = (directory, write))]
#[allow(clippy::type_complexity)]
fn merge<'py>(
    py: Python<'py>,
    directory: PathBuf,
    write: bool,
) -> PyResult<(Bound<'py, PyArray2<f64>>, Vec<String>, Vec<Option<f64>>)> {
    let table = py
        .detach(|| {
            if write {
                planisphere::ensemble::EnsembleJob::write_merged(&directory)
            } else {
                planisphere::ensemble::EnsembleJob::merge(&directory)
            }
        })
        .map_err(py_error)?;
    let (rows, cols) = (table.rows.len(), table.description.labels.len());
    let values: Vec<f64> = table
        .rows
        .iter()
        .flat_map(|r| r.values.iter().copied())
        .collect();
    let array = values.into_pyarray(py).reshape([rows, cols])?;
    let scales = table.label_scales();
    Ok((array, table.description.labels.clone(), scales))
}

/// Runs (a shard of) an ensemble as `ensemble` does, from its command-line arguments (without
/// the program name and command): rows land in the directory, shards may run side by side.
#[pyfunction]
#[pyo3(signature = (arguments, threads))]
fn ensemble_command(py: Python<'_>, arguments: Vec<String>, threads: Option<i64>) -> PyResult<()> {
    use clap::Parser;
    #[derive(clap::Parser)]
    struct EnsembleCommand {
        #[command(flatten)]
        args: planisphere::cli::ensemble::EnsembleArgs,
    }
    let parsed = EnsembleCommand::try_parse_from(
        std::iter::once("planisphere ensemble".to_string()).chain(arguments),
    )
    .map_err(|e| value_error(e.to_string().lines().next().unwrap_or("").to_string()))?;
    py.detach(move || {
        on_threads(threads, move || {
            planisphere::cli::ensemble::run(&parsed.args)
        })
    })
    .map_err(py_error)
}

/// The Python module.
#[pymodule]
#[pyo3(name = "_native")]
fn native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("UNSEEN", planisphere::sky::skymap::UNSEEN)?;
    m.add_function(wrap_pyfunction!(measure_map, m)?)?;
    m.add_function(wrap_pyfunction!(measure_flat, m)?)?;
    m.add_function(wrap_pyfunction!(sky, m)?)?;
    m.add_function(wrap_pyfunction!(spectra, m)?)?;
    m.add_function(wrap_pyfunction!(forecast, m)?)?;
    m.add_function(wrap_pyfunction!(read_map, m)?)?;
    m.add_function(wrap_pyfunction!(write_map, m)?)?;
    m.add_function(wrap_pyfunction!(merge, m)?)?;
    m.add_function(wrap_pyfunction!(ensemble_command, m)?)?;
    Ok(())
}
