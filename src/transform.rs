//! The scattering transform of one square tile, and the engine object shared by all tiles.
//!
//! # What is computed
//!
//! A tile is an n × n plane grid holding the field f(x), an apodized taper a(x) ∈ [0, 1]
//! (applied to the field before filtering, zero outside the footprint) and a pooling weight
//! w(x) ≥ 0 (zero where the pixel must not count). With ψ_{j,l} the Morlet bank of
//! [`crate::filters`] and ⟨·⟩ the w-weighted spatial mean over trusted pixels (below), the tile
//! yields: order 0, the weighted mean and variance of f; order 1, S1(j,l) = ⟨|I∗ψ_{j,l}|⟩ and the
//! band power P(j,l) = ⟨|I∗ψ_{j,l}|²⟩; order 2, S2(j1,l1,j2,l2) = ⟨||I∗ψ_{j1,l1}|∗ψ_{j2,l2}|⟩
//! for j2 > j1. Each is returned as a weighted *sum* plus the weight it was pooled with, so that
//! tiles combine exactly (see [`crate::pooling`]).
//!
//! # Mask-aware estimator
//!
//! Goal: on a field that is statistically stationary, the statistic pooled on a masked footprint
//! should have the same expectation as on the full, unmasked plane.
//!
//! 1. **Taper and mean removal.** The filter input is I(x) = a(x)·(f(x) − μ_a) with
//!    μ_a = Σ a f / Σ a the taper-weighted mean of the tile. Subtracting μ_a keeps the edges of
//!    the taper from imprinting the field's mean onto the (zero-mean) wavelets.
//! 2. **Local normalisation.** For a field with correlation function C, the filtered tapered
//!    field g = I∗ψ has E|g(x)|² = Σ_{y,y'} a(y) a(y') C(y − y') ψ(x − y) ψ*(x − y'). For white
//!    noise (C = σ² δ) this is exactly σ² (a²∗|ψ|²)(x), while without a mask it is σ² Σ|ψ|²; for a
//!    correlated field the same ratio holds to first order in the variation of a across the
//!    wavelet's support. Hence the coverage
//!    N_j(x) = (a² ∗ K_j)(x), with K_j = (1/L) Σ_l |ψ_{j,l}|² / Σ_u (1/L) Σ_l |ψ_{j,l}(u)|²,
//!    equals 1 where the wavelet sees only unit taper, and the normalised modulus
//!    U_{j,l}(x) = |g_{j,l}(x)| / √N_j(x) has locally the variance of the unmasked |f∗ψ|. For a
//!    Gaussian field g is Gaussian, so rescaling its standard deviation makes the whole
//!    distribution of U (and thus ⟨U⟩, ⟨U²⟩) match the unmasked one. K_j is averaged over
//!    orientations: exact for L = 4 (isotropic envelope up to the small β term), an
//!    approximation at edges for elongated envelopes (L > 4), where pooling is restricted
//!    anyway (step 3). N_j is obtained by one FFT of a² and, per scale, one inverse FFT at full
//!    resolution.
//! 3. **Trust cut.** Pixel x enters the pooling of scale j only where N_j(x) ≥ τ (setting
//!    `coverage_threshold`, default 0.9), i.e. where at least 90% of the wavelet's squared
//!    response falls on unit taper; there the first-order approximation of step 2 is accurate.
//!    Edges and holes are thus handled by excluding a margin that grows with the scale (about
//!    one envelope width σ_j); nothing is extrapolated. The pooling weight of S1(j,·) and
//!    P(j,·) is W_j(x) = w(x)·[N_j(x) ≥ τ]; ΣW_j is reported with the sum. The kept fraction
//!    ΣW_j / Σw is reported per coefficient after pooling, and the coefficient is flagged
//!    *trusted* when it is at least `trusted_fraction` (default 0.5).
//! 4. **Second order.** The first-layer output U_{j1,l1} plays the role of the field:
//!    I2 = a·(U_{j1,l1} − μ_U), μ_U its taper-weighted mean, is filtered by ψ_{j2,l2} and
//!    normalised by √N_{j2} (the same taper a, so the same coverage at the second scale);
//!    the pooling weight is W_{j1,j2} = w·[N_{j1} ≥ τ]·[N_{j2} ≥ τ]. Where N_{j1} is tiny, U is
//!    computed with N_{j1} floored at 0.01 (and is there multiplied by a small taper anyway).
//! 5. On a periodic map with a ≡ 1 and w ≡ 1, N ≡ 1, every pixel is trusted and the estimator
//!    reduces to the plain circular-convolution scattering transform.
//! 6. **Tile borders.** Convolutions are circular on the n × n tile. The coverage N cannot
//!    tell a wrapped-around neighbour from a true one, so for a non-periodic tile the taper a
//!    must reach zero before the tile border (an apodized border margin); the coverage then
//!    treats the border like any other edge. The low-pass φ_J of the bank is not used by the
//!    coefficients.
//!
//! # Fourier cropping (speed)
//!
//! Scale j is computed on a grid subsampled by 2^{d_j}: the spectrum is cropped to the central
//! (n/2^{d_j})² box (its Nyquist row and column set to zero, keeping the box symmetric), the
//! product with ψ̂ is inverse transformed at the small size, and the samples of g at every
//! 2^{d_j}-th pixel are exact as long as ψ̂ vanishes outside the box. d_j is the largest level
//! for which every ψ̂_{j,l} and every FT[|ψ_{j,l}|²] (the band of |g|²) stay below
//! `crop_tolerance` (default 1e-6) of their peak outside the box; for σ_j = 0.8·2^j this gives
//! d = j − 2. The modulus |g| is not band-limited, so it is sampled `modulus_oversampling`
//! (default 1) levels finer than that: d_j = max(0, j − 3), i.e. for n = 128, J = 6 the grids
//! are 128, 128, 128, 128, 64, 32. Pooling on the coarse grid uses the weight low-passed
//! (Fourier-cropped) to the same box, which makes Σ_x W h = 4^{d} Σ_X W_lp h exact for
//! band-limited h, so the only error left is the part of the spectrum of |g| outside the box.
//! Measured against the full-resolution path (tests/scattering_cropping.rs, 128², J = 6,
//! L = 4, white and red Gaussian fields, periodic and with holes): largest relative change of
//! any coefficient 2.3e-4 (order 2; order 0–1 far smaller); without the oversampling level
//! (d_j = j − 2) it reached 1.2e-3. Against the numpy reference at 64², J = 5: 6.1e-5.
//!
//! # Work and memory
//!
//! Per tile: 2 real FFTs plus J inverse FFTs at full size for the coverage, one low-pass per
//! pooling weight (J + J(J−1)/2), J·L inverse FFTs for order 1, and for order 2 one real FFT
//! per (j1, l1) and one inverse FFT per (j1, l1, j2, l2) at the cropped size of j2. Memory is a
//! few n² arrays plus the pooling weights, independent of the number of tiles.

use crate::filters::MorletBank;
use crate::pooling::TileSums;
use crate::statistics::CoefficientLabel;
use crate::{Error, Result};
use num_complex::Complex64;
use rayon::prelude::*;
use realfft::{RealFftPlanner, RealToComplex};
use rustfft::{Fft, FftPlanner};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Floor applied to the coverage N before dividing by √N (only matters far outside the trusted
/// region, where the pooling weight is zero).
pub(crate) const COVERAGE_FLOOR: f64 = 0.01;

/// Choices of the estimator; see the module documentation for their meaning.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TransformSettings {
    /// A pixel is pooled at scale j only where the coverage N_j ≥ this value. Default 0.9.
    pub coverage_threshold: f64,
    /// A coefficient is trusted when its kept pooling weight is at least this fraction of the
    /// footprint weight Σw. Default 0.5.
    pub trusted_fraction: f64,
    /// Compute coarse scales on Fourier-cropped grids. Default true.
    pub fourier_cropping: bool,
    /// Relative size of the filters allowed outside a cropped Fourier box. Default 1e-6.
    pub crop_tolerance: f64,
    /// Number of extra factors of 2 by which the modulus |g| is sampled more finely than the
    /// band of the filter requires (the modulus is not band-limited). Default 1.
    pub modulus_oversampling: usize,
}

impl Default for TransformSettings {
    fn default() -> Self {
        Self {
            coverage_threshold: 0.9,
            trusted_fraction: 0.5,
            fourier_cropping: true,
            crop_tolerance: 1e-6,
            modulus_oversampling: 1,
        }
    }
}

/// One tile as seen by the transform: three row-major n × n arrays (index iy·n + ix).
#[derive(Debug, Clone, Copy)]
pub struct TileView<'a> {
    /// Field values f(x).
    pub field: &'a [f64],
    /// Apodized taper a(x) ∈ [0, 1], applied before filtering.
    pub taper: &'a [f64],
    /// Pooling weight w(x) ≥ 0.
    pub weight: &'a [f64],
}

/// Time spent inside FFT calls during one tile, measured by [`ScatteringEngine::transform_tile_timed`].
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct FftTiming {
    /// Total wall time inside FFT calls (including the r2c row pass and spectrum assembly).
    pub fft_time: Duration,
    /// Number of 2D FFTs performed.
    pub fft_count: usize,
}

struct FftClock {
    on: bool,
    timing: FftTiming,
}

impl FftClock {
    fn start(&self) -> Option<Instant> {
        if self.on {
            Some(Instant::now())
        } else {
            None
        }
    }
    fn stop(&mut self, t: Option<Instant>) {
        if let Some(t) = t {
            self.timing.fft_time += t.elapsed();
        }
        self.timing.fft_count += 1;
    }
}

struct LevelPlans {
    size: usize,
    forward: Arc<dyn Fft<f64>>,
    inverse: Arc<dyn Fft<f64>>,
    real_forward: Arc<dyn RealToComplex<f64>>,
}

/// Owns the filter bank, the FFT plans of every grid level and the crop levels; built once for
/// (n, J, L) and shared by reference across tiles and threads (it is `Send + Sync`, every call
/// allocates its own scratch, so results do not depend on scheduling).
pub struct ScatteringEngine {
    bank: MorletBank,
    settings: TransformSettings,
    levels: Vec<usize>,
    plans: Vec<LevelPlans>,
    cropped_wavelets: Vec<Vec<f64>>,
    coverage_kernels: Vec<Vec<f64>>,
    labels: Vec<CoefficientLabel>,
}

impl std::fmt::Debug for ScatteringEngine {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ScatteringEngine")
            .field("size", &self.bank.size())
            .field("scales", &self.bank.scale_count())
            .field("orientations", &self.bank.orientation_count())
            .field("levels", &self.levels)
            .field("settings", &self.settings)
            .finish()
    }
}

fn transpose_square(data: &mut [Complex64], m: usize) {
    for r in 0..m {
        for c in (r + 1)..m {
            data.swap(r * m + c, c * m + r);
        }
    }
}

/// Map a coarse index c on an m_to grid to the fine index on an m_from grid (same frequency).
pub(crate) fn fine_index(c: usize, m_to: usize, m_from: usize) -> usize {
    if c < m_to / 2 {
        c
    } else {
        m_from - (m_to - c)
    }
}

/// Crop a row-major m_from² array (Fourier layout) to the central m_to² box; the Nyquist row
/// and column of the box are zeroed when m_to < m_from.
pub(crate) fn crop_box<T: Copy + Default>(spec: &[T], m_from: usize, m_to: usize) -> Vec<T> {
    if m_to == m_from {
        return spec.to_vec();
    }
    let mut out = vec![T::default(); m_to * m_to];
    for cy in 0..m_to {
        if cy == m_to / 2 {
            continue;
        }
        let fy = fine_index(cy, m_to, m_from);
        for cx in 0..m_to {
            if cx == m_to / 2 {
                continue;
            }
            out[cy * m_to + cx] = spec[fy * m_from + fine_index(cx, m_to, m_from)];
        }
    }
    out
}

pub(crate) fn subsample(data: &[f64], m_from: usize, m_to: usize) -> Vec<f64> {
    if m_to == m_from {
        return data.to_vec();
    }
    let stride = m_from / m_to;
    let mut out = Vec::with_capacity(m_to * m_to);
    for cy in 0..m_to {
        for cx in 0..m_to {
            out.push(data[cy * stride * m_from + cx * stride]);
        }
    }
    out
}

pub(crate) fn check_values(name: &str, values: &[f64], len: usize, n: usize) -> Result<()> {
    if values.len() != len {
        return Err(Error::Mismatch(format!(
            "tile {name} has {} values, expected {len} for a {n} x {n} tile",
            values.len()
        )));
    }
    if let Some(i) = values.iter().position(|v| !v.is_finite()) {
        return Err(Error::Data(format!(
            "tile {name} holds a non-finite value ({}) at pixel {i}",
            values[i]
        )));
    }
    Ok(())
}

/// Check the ranges of the estimator settings ([`Error::Setting`] on a value out of range).
pub(crate) fn validate_settings(settings: &TransformSettings) -> Result<()> {
    if !(settings.coverage_threshold > 0.0 && settings.coverage_threshold <= 1.0) {
        return Err(Error::Setting(format!(
            "coverage threshold must be in (0, 1], got {}",
            settings.coverage_threshold
        )));
    }
    if !(0.0..=1.0).contains(&settings.trusted_fraction) {
        return Err(Error::Setting(format!(
            "trusted fraction must be in [0, 1], got {}",
            settings.trusted_fraction
        )));
    }
    if !(settings.crop_tolerance > 0.0 && settings.crop_tolerance < 1.0) {
        return Err(Error::Setting(format!(
            "crop tolerance must be in (0, 1), got {}",
            settings.crop_tolerance
        )));
    }
    Ok(())
}

/// Crop level d_j of every scale for a bank and settings (module documentation, "Fourier
/// cropping"): the largest d ≤ j (coarse grids of at least 8 pixels) whose box holds ψ̂_{j,l}
/// and FT|ψ_{j,l}|² to the crop tolerance, minus the modulus oversampling, made non-decreasing
/// in j; all zero without cropping.
pub(crate) fn crop_levels_for(bank: &MorletBank, settings: &TransformSettings) -> Vec<usize> {
    let n = bank.size();
    let scale_count = bank.scale_count();
    let max_level = n.trailing_zeros() as usize - 3; // coarse grids of at least 8 pixels
    let mut levels = Vec::with_capacity(scale_count);
    for j in 0..scale_count {
        let mut chosen = 0;
        if settings.fourier_cropping {
            for d in (1..=j.min(max_level)).rev() {
                if ScatteringEngine::fits_in_box(bank, j, n >> d, settings.crop_tolerance) {
                    chosen = d.saturating_sub(settings.modulus_oversampling);
                    break;
                }
            }
        }
        let previous = levels.last().copied().unwrap_or(0);
        levels.push(chosen.max(previous));
    }
    levels
}

impl ScatteringEngine {
    /// Build the engine for n × n tiles, J scales and L orientations with default settings.
    pub fn new(size: usize, scale_count: usize, orientation_count: usize) -> Result<Self> {
        Self::with_settings(
            size,
            scale_count,
            orientation_count,
            TransformSettings::default(),
        )
    }

    /// Build the engine with explicit settings. Errors with [`Error::Setting`] on a size that is
    /// not a power of two ≥ 8, J = 0 or 2^(J+1) > n, L = 0, or settings out of range.
    pub fn with_settings(
        size: usize,
        scale_count: usize,
        orientation_count: usize,
        settings: TransformSettings,
    ) -> Result<Self> {
        validate_settings(&settings)?;
        let bank = MorletBank::new(size, scale_count, orientation_count)?;
        let n = size;
        let levels = crop_levels_for(&bank, &settings);
        let mut planner = FftPlanner::<f64>::new();
        let mut real_planner = RealFftPlanner::<f64>::new();
        let top = levels.iter().copied().max().unwrap_or(0);
        let plans = (0..=top)
            .map(|d| {
                let m = n >> d;
                LevelPlans {
                    size: m,
                    forward: planner.plan_fft_forward(m),
                    inverse: planner.plan_fft_inverse(m),
                    real_forward: real_planner.plan_fft_forward(m),
                }
            })
            .collect();
        let mut cropped_wavelets = Vec::with_capacity(scale_count * orientation_count);
        let mut coverage_kernels = Vec::with_capacity(scale_count);
        for (j, &d) in levels.iter().enumerate() {
            let mut kernel = vec![0.0; n * n];
            for l in 0..orientation_count {
                cropped_wavelets.push(crop_box(bank.wavelet(j, l), n, n >> d));
                for (k, v) in kernel.iter_mut().zip(bank.squared_modulus(j, l)) {
                    *k += v;
                }
            }
            let dc = kernel[0];
            kernel.iter_mut().for_each(|k| *k /= dc);
            coverage_kernels.push(kernel);
        }
        let labels = crate::statistics::coefficient_labels(scale_count, orientation_count);
        Ok(Self {
            bank,
            settings,
            levels,
            plans,
            cropped_wavelets,
            coverage_kernels,
            labels,
        })
    }

    /// True when every ψ̂_{j,l} and FT|ψ_{j,l}|² is below `tol` of its peak outside the central
    /// m × m box (Nyquist lines counted as outside).
    fn fits_in_box(bank: &MorletBank, j: usize, m: usize, tol: f64) -> bool {
        let n = bank.size();
        let half = (m / 2) as i64;
        let signed = |i: usize| -> i64 {
            if i < n / 2 {
                i as i64
            } else {
                i as i64 - n as i64
            }
        };
        (0..bank.orientation_count()).all(|l| {
            [bank.wavelet(j, l), bank.squared_modulus(j, l)]
                .iter()
                .all(|arr| {
                    let peak = arr.iter().fold(0.0f64, |p, v| p.max(v.abs()));
                    (0..n * n).all(|i| {
                        let (qx, qy) = (signed(i % n), signed(i / n));
                        let inside = qx.abs() < half && qy.abs() < half;
                        inside || arr[i].abs() <= tol * peak
                    })
                })
        })
    }

    /// The filter bank.
    pub fn bank(&self) -> &MorletBank {
        &self.bank
    }

    /// The settings the engine was built with.
    pub fn settings(&self) -> &TransformSettings {
        &self.settings
    }

    /// Tile size n.
    pub fn size(&self) -> usize {
        self.bank.size()
    }

    /// Number of scales J.
    pub fn scale_count(&self) -> usize {
        self.bank.scale_count()
    }

    /// Number of orientations L.
    pub fn orientation_count(&self) -> usize {
        self.bank.orientation_count()
    }

    /// Crop level d_j of each scale: scale j is computed on an (n / 2^{d_j})² grid.
    pub fn crop_levels(&self) -> &[usize] {
        &self.levels
    }

    /// Labels of the coefficients, in the order of [`TileSums::sums`].
    pub fn labels(&self) -> &[CoefficientLabel] {
        &self.labels
    }

    /// In-place 2D complex FFT of a row-major m × m array at level d (unnormalised).
    fn fft2(&self, d: usize, data: &mut [Complex64], inverse: bool, clock: &mut FftClock) {
        let t = clock.start();
        let p = &self.plans[d];
        let fft = if inverse { &p.inverse } else { &p.forward };
        let mut scratch = vec![Complex64::default(); fft.get_inplace_scratch_len()];
        fft.process_with_scratch(data, &mut scratch);
        transpose_square(data, p.size);
        fft.process_with_scratch(data, &mut scratch);
        transpose_square(data, p.size);
        clock.stop(t);
    }

    /// Full m × m DFT of a real m × m array at level d, by real-to-complex row transforms,
    /// complex column transforms and Hermitian completion.
    fn real_spectrum(&self, d: usize, input: &[f64], clock: &mut FftClock) -> Vec<Complex64> {
        let t = clock.start();
        let p = &self.plans[d];
        let m = p.size;
        let h = m / 2 + 1;
        let mut row = vec![0.0; m];
        let mut row_out = p.real_forward.make_output_vec();
        let mut scratch = p.real_forward.make_scratch_vec();
        let mut half = vec![Complex64::default(); h * m]; // column-major: [kx·m + iy]
        for iy in 0..m {
            row.copy_from_slice(&input[iy * m..(iy + 1) * m]);
            // Lengths are fixed by the plan, so the transform cannot fail.
            if p.real_forward
                .process_with_scratch(&mut row, &mut row_out, &mut scratch)
                .is_err()
            {
                unreachable!("real FFT buffers have the planned lengths");
            }
            for (kx, v) in row_out.iter().enumerate() {
                half[kx * m + iy] = *v;
            }
        }
        let mut cscratch = vec![Complex64::default(); p.forward.get_inplace_scratch_len()];
        p.forward.process_with_scratch(&mut half, &mut cscratch);
        let mut out = vec![Complex64::default(); m * m];
        for ky in 0..m {
            for kx in 0..m {
                out[ky * m + kx] = if kx < h {
                    half[kx * m + ky]
                } else {
                    half[(m - kx) * m + (m - ky) % m].conj()
                };
            }
        }
        clock.stop(t);
        out
    }

    /// Low-pass a full-resolution real array to level d by cropping its spectrum; returns the
    /// m_d × m_d samples.
    fn low_pass(&self, data: &[f64], d: usize, clock: &mut FftClock) -> Vec<f64> {
        if d == 0 {
            return data.to_vec();
        }
        let n = self.size();
        let spec = self.real_spectrum(0, data, clock);
        let mut c = crop_box(&spec, n, n >> d);
        self.fft2(d, &mut c, true, clock);
        let scale = 1.0 / (n * n) as f64;
        c.iter().map(|z| z.re * scale).collect()
    }

    /// Transform one tile; returns weighted sums and weights for every label (see module doc).
    pub fn transform_tile(&self, tile: &TileView<'_>) -> Result<TileSums> {
        let mut clock = FftClock {
            on: false,
            timing: FftTiming::default(),
        };
        self.run(tile, &mut clock)
    }

    /// As [`Self::transform_tile`], also timing the FFT calls (for profiling).
    pub fn transform_tile_timed(&self, tile: &TileView<'_>) -> Result<(TileSums, FftTiming)> {
        let mut clock = FftClock {
            on: true,
            timing: FftTiming::default(),
        };
        let sums = self.run(tile, &mut clock)?;
        Ok((sums, clock.timing))
    }

    /// Transform many tiles in parallel (rayon); the output keeps the input order and each
    /// tile's result does not depend on the number of threads.
    pub fn transform_tiles(&self, tiles: &[TileView<'_>]) -> Result<Vec<TileSums>> {
        tiles.par_iter().map(|t| self.transform_tile(t)).collect()
    }

    fn run(&self, tile: &TileView<'_>, clock: &mut FftClock) -> Result<TileSums> {
        let n = self.size();
        let nn = n * n;
        let big_j = self.scale_count();
        let big_l = self.orientation_count();
        check_values("field", tile.field, nn, n)?;
        check_values("taper", tile.taper, nn, n)?;
        check_values("weight", tile.weight, nn, n)?;
        if let Some(i) = tile.taper.iter().position(|&a| !(0.0..=1.0).contains(&a)) {
            return Err(Error::Data(format!(
                "tile taper must lie in [0, 1], got {} at pixel {i}",
                tile.taper[i]
            )));
        }
        if let Some(i) = tile.weight.iter().position(|&w| w < 0.0) {
            return Err(Error::Data(format!(
                "tile pooling weight must be non-negative, got {} at pixel {i}",
                tile.weight[i]
            )));
        }
        let (f, a, w) = (tile.field, tile.taper, tile.weight);
        let mut sw = 0.0;
        let mut swf = 0.0;
        let mut swf2 = 0.0;
        for i in 0..nn {
            sw += w[i];
            swf += w[i] * f[i];
            swf2 += w[i] * f[i] * f[i];
        }
        if sw <= 0.0 {
            return Err(Error::Data(
                "tile pooling weights sum to zero: no pixel to pool".into(),
            ));
        }
        let sa: f64 = a.iter().sum();
        if sa <= 0.0 {
            return Err(Error::Data(
                "tile taper is zero everywhere: nothing to filter".into(),
            ));
        }
        let mu = a.iter().zip(f).map(|(a, f)| a * f).sum::<f64>() / sa;
        let input: Vec<f64> = a.iter().zip(f).map(|(a, f)| a * (f - mu)).collect();
        let spectrum = self.real_spectrum(0, &input, clock);

        // Coverage N_j = a² ∗ K_j at full resolution, and the trust masks.
        let a2: Vec<f64> = a.iter().map(|a| a * a).collect();
        let a2_spec = self.real_spectrum(0, &a2, clock);
        let tau = self.settings.coverage_threshold;
        let mut trust: Vec<Vec<bool>> = Vec::with_capacity(big_j);
        let mut coverage_coarse: Vec<Vec<f64>> = Vec::with_capacity(big_j);
        for j in 0..big_j {
            let mut c: Vec<Complex64> = a2_spec
                .iter()
                .zip(&self.coverage_kernels[j])
                .map(|(s, k)| s * k)
                .collect();
            self.fft2(0, &mut c, true, clock);
            let cov: Vec<f64> = c.iter().map(|z| z.re / nn as f64).collect();
            trust.push(cov.iter().map(|&v| v >= tau).collect());
            coverage_coarse.push(
                subsample(&cov, n, n >> self.levels[j])
                    .iter()
                    .map(|c| 1.0 / c.max(COVERAGE_FLOOR).sqrt())
                    .collect::<Vec<f64>>(),
            );
        }
        let mut first_weights = Vec::with_capacity(big_j);
        let mut first_trusted = Vec::with_capacity(big_j);
        for (tj, &level) in trust.iter().zip(&self.levels) {
            let wj: Vec<f64> = w
                .iter()
                .zip(tj)
                .map(|(&w, &t)| if t { w } else { 0.0 })
                .collect();
            first_trusted.push(wj.iter().sum::<f64>());
            first_weights.push(self.low_pass(&wj, level, clock));
        }
        let top = self.levels.iter().copied().max().unwrap_or(0);
        let tapers: Vec<Vec<f64>> = (0..=top).map(|d| subsample(a, n, n >> d)).collect();

        let first_count = big_j * big_l;
        let mut sums = vec![0.0; self.labels.len()];
        let mut weights = vec![0.0; self.labels.len()];
        sums[0] = swf;
        weights[0] = sw;
        sums[1] = swf2;
        weights[1] = sw;
        let s1_base = 2;
        let p_base = 2 + first_count;
        let mut s2_index = 2 + 2 * first_count;
        let mut g2: Vec<Complex64> = Vec::with_capacity(nn);

        for j1 in 0..big_j {
            let d1 = self.levels[j1];
            let m1 = n >> d1;
            let factor1 = (1usize << (2 * d1)) as f64;
            let spec1 = crop_box(&spectrum, n, m1);
            // Pooling weights of the pairs (j1, j2), low-passed to the level of j2.
            let pair_weights: Vec<(Vec<f64>, f64)> = ((j1 + 1)..big_j)
                .map(|j2| {
                    let wp: Vec<f64> = (0..nn)
                        .map(|i| {
                            if trust[j1][i] && trust[j2][i] {
                                w[i]
                            } else {
                                0.0
                            }
                        })
                        .collect();
                    let total = wp.iter().sum::<f64>();
                    (self.low_pass(&wp, self.levels[j2], clock), total)
                })
                .collect();
            for l1 in 0..big_l {
                let psi = &self.cropped_wavelets[j1 * big_l + l1];
                let mut g: Vec<Complex64> = spec1.iter().zip(psi).map(|(s, p)| s * p).collect();
                self.fft2(d1, &mut g, true, clock);
                let scale = 1.0 / nn as f64;
                let inv_sqrt_cov = &coverage_coarse[j1];
                let u: Vec<f64> = g
                    .iter()
                    .zip(inv_sqrt_cov)
                    .map(|(z, &c)| z.norm_sqr().sqrt() * scale * c)
                    .collect();
                let wl = &first_weights[j1];
                let mut s1 = 0.0;
                let mut p = 0.0;
                for (wv, uv) in wl.iter().zip(&u) {
                    s1 += wv * uv;
                    p += wv * uv * uv;
                }
                let idx = j1 * big_l + l1;
                sums[s1_base + idx] = s1 * factor1;
                weights[s1_base + idx] = first_trusted[j1];
                sums[p_base + idx] = p * factor1;
                weights[p_base + idx] = first_trusted[j1];

                if j1 + 1 >= big_j {
                    continue;
                }
                let ad = &tapers[d1];
                let sad: f64 = ad.iter().sum();
                let mu_u = if sad > 0.0 {
                    ad.iter().zip(&u).map(|(a, u)| a * u).sum::<f64>() / sad
                } else {
                    0.0
                };
                let second_input: Vec<f64> =
                    ad.iter().zip(&u).map(|(a, u)| a * (u - mu_u)).collect();
                let spec2 = self.real_spectrum(d1, &second_input, clock);
                for (pair, j2) in ((j1 + 1)..big_j).enumerate() {
                    let d2 = self.levels[j2];
                    let m2 = n >> d2;
                    let factor2 = (1usize << (2 * d2)) as f64;
                    let spec2c = if m2 == m1 {
                        std::borrow::Cow::Borrowed(&spec2[..])
                    } else {
                        std::borrow::Cow::Owned(crop_box(&spec2, m1, m2))
                    };
                    let inv_sqrt_cov2 = &coverage_coarse[j2];
                    let (wp, wtotal) = &pair_weights[pair];
                    let scale2 = 1.0 / (m1 * m1) as f64;
                    for l2 in 0..big_l {
                        let psi2 = &self.cropped_wavelets[j2 * big_l + l2];
                        g2.clear();
                        g2.extend(spec2c.iter().zip(psi2).map(|(s, p)| s * p));
                        self.fft2(d2, &mut g2, true, clock);
                        let mut s2 = 0.0;
                        for ((z, &c), wv) in g2.iter().zip(inv_sqrt_cov2).zip(wp) {
                            s2 += wv * z.norm_sqr().sqrt() * c;
                        }
                        sums[s2_index] = s2 * factor2 * scale2;
                        weights[s2_index] = *wtotal;
                        s2_index += 1;
                    }
                }
            }
        }
        Ok(TileSums {
            footprint_weight: sw,
            sums,
            weights,
        })
    }
}
