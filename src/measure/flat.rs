//! Flat (plane) maps: the periodic and masked scattering transform of a flat map, and flat
//! Gaussian random fields of a given isotropic power spectrum.
//!
//! # Power-spectrum convention
//!
//! A flat map has n × n pixels of side Δ radians (pixel area Δ², patch area A = (nΔ)²), periodic.
//! Its DFT is f̂_q = Σ_x f(x) e^{−2πi q·x/n} (unnormalised), at wavenumber k_q = 2π|q|/(nΔ) in
//! rad⁻¹. The continuous convention ⟨f̃(k) f̃*(k')⟩ = (2π)² δ²(k − k') P(k), with f̃ ≈ Δ² f̂ and
//! (2π)² δ²(0) = A, gives
//!
//! ⟨|f̂_q|²⟩ = n² P(k_q) / Δ²,
//!
//! so that the pixel variance is σ² = (1/n⁴) Σ_q ⟨|f̂_q|²⟩ = Σ_q P(k_q) / A ≈ ∫ d²k P(k)/(2π)².
//! This is the common flat-sky convention (e.g. the flat-sky limit used with
//! LoVerde & Afshordi 2008, PRD 78, 123506, where P(k) ≈ C_ℓ at ℓ + ½ = k). The q = 0 mode is
//! set to zero: generated fields have zero mean over the patch.

use crate::scattering::fft::{signed_frequency, SquareFft};
use crate::scattering::pooling::pooled_coefficients;
use crate::scattering::statistics::CoefficientSet;
use crate::scattering::transform::{ScatteringEngine, TileView};
use crate::{Error, Result};
use num_complex::Complex64;
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

/// An n × n flat map with pixel side `pixel_size` (radians), optional taper and pooling weight.
#[derive(Debug, Clone, PartialEq)]
pub struct FlatMap {
    size: usize,
    pixel_size: f64,
    values: Vec<f64>,
    taper: Option<Vec<f64>>,
    weight: Option<Vec<f64>>,
}

impl FlatMap {
    /// A map from row-major values (index iy·n + ix). Errors on a length that is not n², a
    /// non-positive pixel size, or non-finite values.
    pub fn new(size: usize, pixel_size: f64, values: Vec<f64>) -> Result<Self> {
        if values.len() != size * size || size == 0 {
            return Err(Error::Mismatch(format!(
                "flat map of size {size} needs {} values, got {}",
                size * size,
                values.len()
            )));
        }
        if !(pixel_size.is_finite() && pixel_size > 0.0) {
            return Err(Error::Setting(format!(
                "pixel size must be a positive number of radians, got {}",
                crate::error::compact(pixel_size)
            )));
        }
        crate::error::check_finite(&values, |i| {
            format!(
                "flat map holds a non-finite value ({}) at pixel {i}",
                values[i]
            )
        })?;
        Ok(Self {
            size,
            pixel_size,
            values,
            taper: None,
            weight: None,
        })
    }

    /// Attach an apodized taper a ∈ [0, 1] and, optionally, a pooling weight (defaults to the
    /// taper itself).
    pub fn with_mask(mut self, taper: Vec<f64>, weight: Option<Vec<f64>>) -> Result<Self> {
        let nn = self.size * self.size;
        if taper.len() != nn {
            return Err(Error::Mismatch(format!(
                "mask has {} values, map has {nn}",
                taper.len()
            )));
        }
        if let Some(w) = &weight {
            if w.len() != nn {
                return Err(Error::Mismatch(format!(
                    "pooling weight has {} values, map has {nn}",
                    w.len()
                )));
            }
        }
        self.taper = Some(taper);
        self.weight = weight;
        Ok(self)
    }

    /// Side length n in pixels.
    pub fn size(&self) -> usize {
        self.size
    }

    /// Pixel side in radians.
    pub fn pixel_size(&self) -> f64 {
        self.pixel_size
    }

    /// Field values, row-major.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The taper, if any.
    pub fn taper(&self) -> Option<&[f64]> {
        self.taper.as_deref()
    }

    /// The pooling weight, if any (the taper stands in for it when absent).
    pub fn weight(&self) -> Option<&[f64]> {
        self.weight.as_deref().or(self.taper.as_deref())
    }
}

fn check_size(engine: &ScatteringEngine, map: &FlatMap) -> Result<()> {
    if engine.size() != map.size {
        return Err(Error::Mismatch(format!(
            "map is {} pixels wide but the engine was built for {}",
            map.size,
            engine.size()
        )));
    }
    Ok(())
}

/// Periodic scattering transform of a flat map: taper 1 and weight 1 everywhere, circular
/// convolutions (any mask on the map is ignored).
pub fn periodic_coefficients(engine: &ScatteringEngine, map: &FlatMap) -> Result<CoefficientSet> {
    check_size(engine, map)?;
    let ones = vec![1.0; map.size * map.size];
    let sums = engine.transform_tile(&TileView {
        field: &map.values,
        taper: &ones,
        weight: &ones,
    })?;
    pooled_coefficients(engine, &sums)
}

/// Mask-aware scattering transform of a flat map with its taper and pooling weight (see
/// [`crate::scattering::transform`]). Errors if the map has no mask.
pub fn masked_coefficients(engine: &ScatteringEngine, map: &FlatMap) -> Result<CoefficientSet> {
    check_size(engine, map)?;
    let taper = map
        .taper()
        .ok_or_else(|| Error::Setting("masked transform of a map without a mask".into()))?;
    let weight = map.weight().unwrap_or(taper);
    let sums = engine.transform_tile(&TileView {
        field: &map.values,
        taper,
        weight,
    })?;
    pooled_coefficients(engine, &sums)
}

/// Measures a flat field as one tile with the statistics of a sphere measurement
/// ([`crate::measure::measurement::SphereMeasurer::measure`]): the full labelled set with trust flags,
/// the orientation-harmonic summary, the tile power spectrum and (if enabled) bispectrum.
///
/// Without a mask the field is periodic (taper a ≡ 1, weight w ≡ 1,
/// [`periodic_coefficients`]); with one, the mask-aware estimator of [`crate::scattering::transform`] runs
/// with the mask as taper and pooling weight as given ([`masked_coefficients`]): a = w = mask,
/// so a field that is not periodic needs a mask that falls to 0 at its edges. Uses `scales`,
/// `orientations`, `transform`, `spectrum_bins` and `bispectrum` of `settings`; the tiling and
/// sampling settings have no meaning here (no sampling: every coefficient the pooling trusts
/// stays trusted). A value that could not be computed is never trusted.
pub fn measure(
    map: &FlatMap,
    settings: &crate::measure::measurement::MeasurementSettings,
) -> Result<crate::measure::measurement::MapStatistics> {
    use crate::measure::tile_spectra::{FourierStatistics, WavenumberBins};
    let n = map.size;
    let engine = ScatteringEngine::with_settings(
        n,
        settings.scales,
        settings.orientations,
        settings.transform,
    )?;
    let mut coefficients = match map.taper() {
        None => periodic_coefficients(&engine, map)?,
        Some(_) => masked_coefficients(&engine, map)?,
    };
    for c in coefficients.coefficients.iter_mut() {
        c.trusted &= c.value.is_finite();
    }
    let summary = coefficients.summary().unwrap_or_default();
    let ones;
    let (taper, weight) = match map.taper() {
        Some(t) => (t, map.weight().unwrap_or(t)),
        None => {
            ones = vec![1.0; n * n];
            (&ones[..], &ones[..])
        }
    };
    let weight_sum: f64 = weight.iter().sum();
    if weight_sum.is_nan() || weight_sum <= 0.0 {
        return Err(Error::Data(
            "the mask is 0 everywhere: nothing to measure".into(),
        ));
    }
    let bins = WavenumberBins::logarithmic(n, map.pixel_size, settings.spectrum_bins)?;
    let fourier = FourierStatistics::with_plans(engine.tile_fft().clone(), map.pixel_size, bins)?;
    let tile_power = fourier.power_spectrum(&map.values, taper, weight_sum)?;
    let tile_bispectrum = if settings.bispectrum {
        let triangles = fourier.triangles();
        Some(fourier.bispectrum(&map.values, taper, weight_sum, &triangles)?)
    } else {
        None
    };
    Ok(crate::measure::measurement::MapStatistics {
        coefficients,
        summary,
        tile_power,
        tile_bispectrum,
        tiles: 1,
        per_tile: Vec::new(),
    })
}

/// Wavenumber k_q = 2π|q|/(nΔ) (rad⁻¹) of the DFT index (ix, iy) on an n-pixel grid, q the
/// [`signed_frequency`] of each index. The same quantity as
/// [`crate::scattering::fft::wavenumber`] to within an ulp, but rounded in this order
/// (2π·hypot(q_x, q_y) / (nΔ)), which the seeded fields of [`gaussian_random_field`] keep,
/// so that they stay bitwise reproducible across versions.
pub fn wavenumber(ix: usize, iy: usize, size: usize, pixel_size: f64) -> f64 {
    let s = |i: usize| signed_frequency(i, size) as f64;
    2.0 * std::f64::consts::PI * s(ix).hypot(s(iy)) / (size as f64 * pixel_size)
}

/// Gaussian random field with isotropic power spectrum `spectrum(k)` (k in rad⁻¹, convention in
/// the module documentation), generated by colouring white noise in Fourier space:
/// f̂_q = ŵ_q √P(k_q) / Δ with ŵ the DFT of unit-variance white noise (⟨|ŵ_q|²⟩ = n²), then
/// f = (1/n²) Σ_q f̂_q e^{2πi q·x/n}.
/// Reproducible: ChaCha20 seeded with `seed`.
pub fn gaussian_random_field(
    size: usize,
    pixel_size: f64,
    spectrum: &dyn Fn(f64) -> f64,
    seed: u64,
) -> Result<FlatMap> {
    if size < 2 {
        return Err(Error::Setting(format!(
            "flat map size must be at least 2 pixels, got {size}"
        )));
    }
    if !(pixel_size.is_finite() && pixel_size > 0.0) {
        return Err(Error::Setting(format!(
            "pixel size must be a positive number of radians, got {}",
            crate::error::compact(pixel_size)
        )));
    }
    let nn = size * size;
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    let mut data: Vec<Complex64> = (0..nn)
        .map(|_| Complex64::new(StandardNormal.sample(&mut rng), 0.0))
        .collect();
    let fft = SquareFft::new(size);
    fft.forward(&mut data);
    for iy in 0..size {
        for ix in 0..size {
            let k = wavenumber(ix, iy, size, pixel_size);
            let p = if ix == 0 && iy == 0 { 0.0 } else { spectrum(k) };
            if !(p.is_finite() && p >= 0.0) {
                return Err(Error::Data(format!(
                    "power spectrum must be finite and non-negative, got {} at k = {k} rad^-1",
                    crate::error::compact(p)
                )));
            }
            data[iy * size + ix] *= p.sqrt() / pixel_size;
        }
    }
    fft.inverse_unnormalised(&mut data);
    let scale = 1.0 / nn as f64;
    FlatMap::new(
        size,
        pixel_size,
        data.iter().map(|z| z.re * scale).collect(),
    )
}

/// Checks the shape of a flat field: square, with a side the engine accepts
/// ([`crate::limits::is_tile_size`]) and at most [`crate::tiles::tiling::MAX_TILE_PIXELS`]; the
/// error is the reason, without the field's name.
pub fn check_field_shape(rows: usize, cols: usize) -> std::result::Result<(), String> {
    if rows != cols {
        return Err(format!(
            "a flat field must be square, got {rows} rows × {cols} columns"
        ));
    }
    if !crate::limits::is_tile_size(rows) || rows > crate::tiles::tiling::MAX_TILE_PIXELS {
        return Err(format!(
            "a flat field of {rows} × {rows} pixels: the side must be 2^k·m (m = 1, 3, 5, 7 or 9; at least 8, and 16·m when m > 1) and at most {}; crop or pad it",
            crate::tiles::tiling::MAX_TILE_PIXELS
        ));
    }
    Ok(())
}

/// Checks a flat mask of n × n values (`label` names it in messages): finite values in
/// [0, 1], not all 0.
pub fn check_mask(label: &str, values: &[f64], n: usize) -> Result<()> {
    if let Some(i) = values
        .iter()
        .position(|v| !(v.is_finite() && (0.0..=1.0).contains(v)))
    {
        return Err(Error::Data(format!(
            "{}: mask value {} at row {}, column {} is outside [0, 1]",
            label,
            values[i],
            i / n,
            i % n
        )));
    }
    if values.iter().all(|&v| v == 0.0) {
        return Err(Error::Data(format!(
            "{}: the mask is 0 everywhere: nothing to measure",
            label
        )));
    }
    Ok(())
}

/// The field's values with non-finite values allowed only where the mask is 0 (set to 0 there:
/// the taper removes them); elsewhere a non-finite value is an error.
pub fn field_values(label: &str, mut values: Vec<f64>, mask: Option<&[f64]>) -> Result<Vec<f64>> {
    let n = (values.len() as f64).sqrt() as usize;
    for (i, v) in values.iter_mut().enumerate() {
        if !v.is_finite() {
            if mask.is_some_and(|m| m[i] == 0.0) {
                *v = 0.0;
            } else {
                return Err(Error::Data(format!(
                    "{}: value {v} at row {}, column {}{}",
                    label,
                    i / n.max(1),
                    i % n.max(1),
                    if mask.is_some() {
                        " where the mask is not 0 (non-finite values are allowed only where it is 0)"
                    } else {
                        " (a flat field without --mask must be finite everywhere)"
                    }
                )));
            }
        }
    }
    Ok(values)
}
