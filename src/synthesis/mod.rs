//! Synthesis of new flat fields whose scattering statistics match a target.
//!
//! Owns: the synthesis of flat fields (this module), the differentiable scattering transforms of
//! a periodic field ([`gradient`]) and of a masked tile ([`tile_gradient`]), the synthesis of
//! a HEALPix map on a footprint ([`sphere`]) and its one-point shape term ([`one_point`]).
//!
//! May use: [`crate::sky`], [`crate::harmonics`], [`crate::simulate`], [`crate::tiles`],
//! [`crate::scattering`], [`crate::measure`] and the crate's foundations.
//!
//! # Problem
//!
//! Given target statistics t (from a flat periodic map, or read from a coefficient file), find a
//! field f whose statistics s(f) minimise the normalised squared distance
//!
//! L(f) = Σ_i ((s_i(f) − t_i) / σ_i)²,
//!
//! with σ_i = |t_i| by default (relative distance; [`Normalisation::Relative`]; for the
//! summary's items that sit near 0 an absolute floor, see there) or σ_i given by
//! the user ([`Normalisation::Given`], e.g. ensemble standard deviations). The statistics are
//! the full coefficient set or the orientation-harmonic summary of [`crate::scattering::statistics`]
//! (user's choice), both *without the mean*, optionally followed by the field–envelope correlations
//! C_j = (1/L) Σ_l ⟨(f − μ) |f∗ψ_{j,l}|⟩ (J numbers, see below) and by the binned power spectrum
//! P̂(k_b). All of them are
//! invariant under adding a constant, so the gradient has zero mean and the mean of the field is
//! that of the start field, which is set to the target's mean.
//!
//! s(f) and ∂L/∂f come from [`gradient::DifferentiableScattering`]. With
//! [`SynthesisSettings::fourier_cropping`] (the default) the coefficients are those of the
//! measuring engine with its default settings: the tile estimator of [`tile_gradient`] with
//! taper a ≡ 1 and weight w ≡ 1 on the periodic field, each scale on its Fourier-cropped grid,
//! pooled as c_i = Σ W h / Σ W (so a target measured by the engine is matched with the same
//! estimator); its gradient is the adjoint of that path, cropping included. Without cropping, or
//! when the crop levels are all zero (small n or J), or with the field–envelope correlations
//! (defined at full resolution only), the periodic full-resolution transform of [`gradient`] is
//! used. L is minimised by L-BFGS (Nocedal & Wright 2006, *Numerical Optimization*, Alg. 7.4/7.5) with
//! the Moré–Thuente line search (Moré & Thuente 1994, ACM TOMS 20, 286), both from the `argmin`
//! crate. The pixels are optimised in the units x = (f − μ_t)/σ_t of the target's mean and
//! standard deviation, which makes the first step scale-free.
//!
//! # Start fields (seeded, reproducible: ChaCha20)
//!
//! * white noise of the target's mean and variance;
//! * a Gaussian field with the target's power spectrum: f̂_q = ŵ_q |F_t(q)| / n for q ≠ 0, with
//!   ŵ the DFT of unit white noise and F_t the DFT of the mean-removed target, so that
//!   ⟨|f̂_q|²⟩ = |F_t(q)|² (the same colouring as [`crate::measure::flat::gaussian_random_field`]).
//!
//! # Sign of the fluctuations
//!
//! The coefficients and the power spectrum are invariant under the reflection f → 2μ − f
//! (|−z| = |z|), so they cannot tell positive peaks from negative ones, and the sign of the
//! field's skewness is not constrained; matching them alone leaves a field whose peaks and
//! troughs are mixed. Two remedies (the command line uses the first by default for a target
//! map):
//!
//! * the field–envelope correlations C_j change sign with f → −f: positive where the field is
//!   high where its scale-j envelope is strong (positive peaks), negative for troughs. Because
//!   they can vanish, their relative normalisation is their Cauchy–Schwarz bound
//!   σ = √(Var_t · (1/L) Σ_l P_t(j,l)) instead of |t|;
//! * without them, the synthesised field is reflected at the end if its third central moment has
//!   the opposite sign to the target's (one bit of information; [`SynthesisSettings::match_sign`]).
//!
//! # Power spectrum term
//!
//! With F = DFT(f − μ) and bins b of [`crate::measure::tile_spectra::WavenumberBins`],
//! P̂_b = Δ² Σ_{k∈b} |F_k|² / (N n_b) (the periodogram of [`crate::measure::tile_spectra`] with taper 1),
//! and ∂P̂_b/∂f_x = (2Δ²/n_b) Re IDFT(1_b F)(x).

pub mod gradient;
pub mod one_point;
pub mod sphere;
pub mod tile_gradient;

pub use gradient::{DifferentiableScattering, ForwardPass};
pub use tile_gradient::{TileForward, TileGeometry};

use crate::scattering::transform::TransformSettings;

use crate::measure::tile_spectra::WavenumberBins;
use crate::scattering::fft::{wavenumber, SquareFft};
use crate::scattering::statistics::{CoefficientLabel, OrientationSummary};
use crate::{Error, Result};
use argmin::core::observers::{Observe, ObserverMode};
use argmin::core::{CostFunction, Executor, Gradient, State, KV};
use argmin::solver::linesearch::MoreThuenteLineSearch;
use argmin::solver::quasinewton::LBFGS;
use num_complex::Complex64;
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};
use std::sync::{Arc, Mutex};

/// Which scattering statistics are matched.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StatisticChoice {
    /// Variance, S1(j,l), P(j,l) and S2(j1,l1,j2,l2): every coefficient but the mean.
    Full,
    /// The orientation-harmonic summary without the mean ([`crate::scattering::statistics`]: rms, modulus
    /// and modulus anisotropy per scale, intermittency and alignment per scale pair). Needs
    /// L ≥ 2.
    Summary,
}

/// The σ_i of the distance Σ ((s_i − t_i)/σ_i)².
#[derive(Debug, Clone, PartialEq)]
pub enum Normalisation {
    /// σ_i = |t_i| (relative distance); for the summary's alignment and modulus anisotropy
    /// max(|t_i|, 0.1) ([`crate::scattering::statistics::SummaryKind::distance_scale`]).
    Relative,
    /// σ_i given, one per statistic (same order as [`FlatSynthesis::statistic_names`]).
    Given(Vec<f64>),
}

/// The field the optimisation starts from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StartField {
    /// White noise with the target's mean and variance.
    White,
    /// Gaussian field with the target map's power spectrum (needs a target map).
    Gaussian,
}

/// Options of one synthesis.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthesisSettings {
    /// Statistic set to match.
    pub statistics: StatisticChoice,
    /// σ_i of the distance.
    pub normalisation: Normalisation,
    /// Include the sign-sensitive field–envelope correlations C_j (target maps only; on the
    /// sphere also the one-point C_pix and the skewness and kurtosis of the tile fields,
    /// [`sphere`]). Off in `Default`; `planisphere synthesize` turns them on for target maps.
    pub field_envelope_correlation: bool,
    /// Include the power spectrum in this many logarithmic bins (empty bins are dropped).
    pub power_spectrum_bins: Option<usize>,
    /// Maximum number of L-BFGS iterations.
    pub iterations: u64,
    /// Number of correction pairs kept by L-BFGS.
    pub memory: usize,
    /// Seed of the start field.
    pub seed: u64,
    /// Start field.
    pub start: StartField,
    /// Reflect the result so that its skewness has the target's sign (target maps only).
    pub match_sign: bool,
    /// Show a progress bar with the loss (stderr).
    pub progress: bool,
    /// Compute the coefficients with Fourier cropping, as the measuring engine does with its
    /// default settings (module documentation). Default true.
    pub fourier_cropping: bool,
}

impl SynthesisSettings {
    /// Refuses optimiser settings no synthesis can run with: no iteration, no L-BFGS memory.
    pub(crate) fn check_optimiser(&self) -> Result<()> {
        if self.iterations == 0 {
            return Err(Error::Setting(
                "the number of iterations must be at least 1".into(),
            ));
        }
        if self.memory == 0 {
            return Err(Error::Setting(
                "the L-BFGS memory must be at least 1 pair".into(),
            ));
        }
        Ok(())
    }
}

impl Default for SynthesisSettings {
    fn default() -> Self {
        Self {
            statistics: StatisticChoice::Full,
            normalisation: Normalisation::Relative,
            field_envelope_correlation: false,
            power_spectrum_bins: None,
            iterations: 200,
            memory: 10,
            seed: 1,
            start: StartField::Gaussian,
            match_sign: true,
            progress: false,
            fourier_cropping: true,
        }
    }
}

/// The statistics a synthesis matches, flat or on the sphere, with the widths of its distance
/// and the target's one-point scale.
#[derive(Debug, Clone, PartialEq)]
pub struct MatchedTarget {
    /// Target values of the matched statistics (chosen set, correlations, power-spectrum bins
    /// or shape terms).
    pub values: Vec<f64>,
    /// σ_i of the distance, one per statistic.
    pub sigma: Vec<f64>,
    /// Target mean, pooled on a footprint (the start field gets it).
    pub mean: f64,
    /// Target standard deviation, √variance (unit of the optimised pixels).
    pub standard_deviation: f64,
}

impl MatchedTarget {
    /// The target of full pooled `coefficients` (mean first, then the variance, checked by
    /// [`checked_target_variance`]) matched as `values` with widths `sigma`.
    pub(crate) fn of_coefficients(
        values: Vec<f64>,
        sigma: Vec<f64>,
        coefficients: &[f64],
        variance: f64,
    ) -> Self {
        Self {
            values,
            sigma,
            mean: coefficients[0],
            standard_deviation: variance.sqrt(),
        }
    }
}

/// What the field must reproduce.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthesisTarget {
    /// The matched statistics, their widths and the target's mean and standard deviation.
    pub matched: MatchedTarget,
    /// |F_t(q)| of the mean-removed target map, when the target is a map.
    pub spectrum_amplitude: Option<Vec<f64>>,
    /// Sign of the target map's third central moment, when the target is a map.
    pub third_moment_sign: Option<f64>,
}

/// How a synthesis converged, flat or on the sphere: the statistics reached and the optimiser's
/// record.
#[derive(Debug, Clone, PartialEq)]
pub struct OptimisationReport {
    /// Statistics of the result (same order as the target's).
    pub statistics: Vec<f64>,
    /// Loss at the start.
    pub initial_loss: f64,
    /// Loss of the result.
    pub final_loss: f64,
    /// Best loss after every L-BFGS iteration.
    pub loss_history: Vec<f64>,
    /// Iterations done.
    pub iterations: u64,
    /// Loss-and-gradient evaluations made by the optimiser (line-search trials included).
    pub evaluations: u64,
    /// Why the optimiser stopped.
    pub termination: String,
    /// max_i |s_i − t_i| / σ_i over the matched statistics (with the relative normalisation:
    /// the maximum relative deviation, correlations measured against their bound).
    pub max_relative_deviation: f64,
}

impl OptimisationReport {
    /// The report of `run`, which started at `initial_loss` and ended at `final_loss` with
    /// `statistics`, matched against `target` with widths `sigma`.
    pub(crate) fn new(
        run: Minimisation,
        (initial_loss, final_loss): (f64, f64),
        statistics: Vec<f64>,
        (target, sigma): (&[f64], &[f64]),
    ) -> Self {
        let max_relative_deviation = max_relative_deviation(&statistics, target, sigma);
        Self {
            statistics,
            initial_loss,
            final_loss,
            loss_history: run.history,
            iterations: run.iterations,
            evaluations: run.evaluations,
            termination: run.termination,
            max_relative_deviation,
        }
    }
}

/// Result of a synthesis.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthesisOutcome {
    /// The synthesised field, row-major n × n.
    pub field: Vec<f64>,
    /// The start field.
    pub start: Vec<f64>,
    /// How it converged.
    pub report: OptimisationReport,
    /// True when the field was reflected to match the target's skewness sign.
    pub reflected: bool,
}

/// Binned periodogram with its gradient (module documentation).
#[derive(Debug, Clone)]
struct PowerTerm {
    pixel_size: f64,
    /// Bin index (into the kept bins) of every Fourier cell, usize::MAX when none.
    cell_bin: Vec<usize>,
    modes: Vec<usize>,
}

impl PowerTerm {
    fn new(n: usize, pixel_size: f64, count: usize) -> Result<Self> {
        let bins = WavenumberBins::logarithmic(n, pixel_size, count)?;
        let mut raw = vec![usize::MAX; n * n];
        let mut modes = vec![0usize; bins.len()];
        // |k| from the same function as the tile spectra, so that cells on bin edges (the
        // fundamental sits on the first edge) fall in the same bin.
        for iy in 0..n {
            for ix in 0..n {
                let k = wavenumber(ix, iy, n, pixel_size);
                if let Some(b) = bins.bin_of(k) {
                    raw[iy * n + ix] = b;
                    modes[b] += 1;
                }
            }
        }
        // Keep only bins holding modes, renumbered.
        let mut map = vec![usize::MAX; bins.len()];
        let mut kept = Vec::new();
        for (b, &m) in modes.iter().enumerate() {
            if m > 0 {
                map[b] = kept.len();
                kept.push(m);
            }
        }
        let cell_bin = raw
            .iter()
            .map(|&b| if b == usize::MAX { b } else { map[b] })
            .collect();
        Ok(Self {
            pixel_size,
            cell_bin,
            modes: kept,
        })
    }

    fn len(&self) -> usize {
        self.modes.len()
    }

    fn power(&self, spectrum: &[Complex64]) -> Vec<f64> {
        let nn = spectrum.len() as f64;
        let mut sums = vec![0.0; self.len()];
        for (z, &b) in spectrum.iter().zip(&self.cell_bin) {
            if b != usize::MAX {
                sums[b] += z.norm_sqr();
            }
        }
        let d2 = self.pixel_size * self.pixel_size;
        sums.iter()
            .zip(&self.modes)
            .map(|(s, &m)| d2 * s / (nn * m as f64))
            .collect()
    }

    /// Fourier multiplier c_k = 2Δ² w_b / n_b: ∂(Σ_b w_b P̂_b)/∂f = Re IDFT(c·F).
    fn adjoint_multiplier(&self, weights: &[f64]) -> Vec<f64> {
        let d2 = self.pixel_size * self.pixel_size;
        self.cell_bin
            .iter()
            .map(|&b| {
                if b == usize::MAX {
                    0.0
                } else {
                    2.0 * d2 * weights[b] / self.modes[b] as f64
                }
            })
            .collect()
    }
}

/// Third central moment sign, mean, standard deviation of a field.
fn moments(values: &[f64]) -> (f64, f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n;
    let m3 = values.iter().map(|v| (v - mean).powi(3)).sum::<f64>() / n;
    (mean, var.sqrt(), m3)
}

/// One-point moments of a field: (mean, standard deviation, skewness m3/σ³, excess kurtosis
/// m4/σ⁴ − 3), population (1/N) moments.
pub fn one_point_moments(values: &[f64]) -> (f64, f64, f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let m = |p: i32| values.iter().map(|v| (v - mean).powi(p)).sum::<f64>() / n;
    let var = m(2);
    let sd = var.sqrt();
    (mean, sd, m(3) / (var * sd), m(4) / (var * var) - 3.0)
}

/// Number of local maxima of a periodic n × n field (strictly above its 8 neighbours) whose
/// height exceeds μ + ν σ, for each ν in `thresholds` (μ, σ the field's mean and standard
/// deviation). Common practice for weak-lensing peak counts.
pub fn peak_counts(values: &[f64], size: usize, thresholds: &[f64]) -> Vec<usize> {
    let (mean, sd, _) = moments(values);
    let n = size;
    let mut heights = Vec::new();
    for iy in 0..n {
        for ix in 0..n {
            let v = values[iy * n + ix];
            let mut is_max = true;
            for dy in [n - 1, 0, 1] {
                for dx in [n - 1, 0, 1] {
                    if dx == 0 && dy == 0 {
                        continue;
                    }
                    let w = values[((iy + dy) % n) * n + (ix + dx) % n];
                    if w >= v {
                        is_max = false;
                    }
                }
            }
            if is_max {
                heights.push((v - mean) / sd);
            }
        }
    }
    thresholds
        .iter()
        .map(|&nu| heights.iter().filter(|&&h| h > nu).count())
        .collect()
}

/// The orientation-harmonic summary without the mean from the full coefficients c, and its
/// adjoint ∂L/∂s ↦ ∂L/∂c. Formulas in [`crate::scattering::statistics`].
#[derive(Debug)]
pub(crate) struct SummaryMap {
    layout: OrientationSummary,
}

impl SummaryMap {
    pub(crate) fn new(scale_count: usize, orientation_count: usize) -> Result<Self> {
        Ok(Self {
            layout: OrientationSummary::new(scale_count, orientation_count)?,
        })
    }

    /// Names of the matched items (the summary without the mean).
    pub(crate) fn names(&self) -> Vec<String> {
        self.layout.names().split_off(1)
    }

    pub(crate) fn len(&self) -> usize {
        self.layout.len() - 1
    }

    pub(crate) fn values(&self, c: &[f64]) -> Vec<f64> {
        self.layout.values(c).split_off(1)
    }

    /// The relative-distance scale σ_i of each matched item at the target values
    /// ([`crate::scattering::statistics::SummaryKind::distance_scale`]).
    pub(crate) fn distance_scales(&self, values: &[f64]) -> Vec<f64> {
        self.layout.labels()[1..]
            .iter()
            .zip(values)
            .map(|(label, &t)| label.kind.distance_scale(t))
            .collect()
    }

    pub(crate) fn adjoint(&self, c: &[f64], ds: &[f64]) -> Vec<f64> {
        let mut dv = Vec::with_capacity(ds.len() + 1);
        dv.push(0.0);
        dv.extend_from_slice(ds);
        self.layout.adjoint(c, &dv)
    }
}

/// Checks target coefficients against the `labels` of the transform (count, finite values,
/// positive variance) and returns the target variance, coefficient 1.
pub(crate) fn checked_target_variance(
    coefficients: &[f64],
    labels: &[CoefficientLabel],
) -> Result<f64> {
    if coefficients.len() != labels.len() {
        return Err(Error::Mismatch(format!(
            "{} coefficients given, J and L call for {}",
            coefficients.len(),
            labels.len()
        )));
    }
    crate::error::check_finite(coefficients, |i| {
        format!(
            "target coefficient {} is not a finite number",
            label_name(&labels[i])
        )
    })?;
    let variance = coefficients[1];
    if variance.is_nan() || variance <= 0.0 {
        return Err(Error::Data(format!(
            "target variance must be positive, got {}",
            crate::error::compact(variance)
        )));
    }
    Ok(variance)
}

/// The matched statistics of the coefficients `c` (the order-0 mean dropped): all of them, or
/// their orientation-harmonic summary when `summary` is given.
pub(crate) fn matched_statistics(summary: Option<&SummaryMap>, c: &[f64]) -> Vec<f64> {
    match summary {
        None => c[1..].to_vec(),
        Some(m) => m.values(c),
    }
}

/// Adjoint of [`matched_statistics`]: ∂L/∂s ↦ ∂L/∂c.
pub(crate) fn matched_statistics_adjoint(
    summary: Option<&SummaryMap>,
    c: &[f64],
    ds: &[f64],
) -> Vec<f64> {
    match summary {
        None => {
            let mut dc = vec![0.0; c.len()];
            dc[1..].copy_from_slice(ds);
            dc
        }
        Some(m) => m.adjoint(c, ds),
    }
}

fn label_name(label: &CoefficientLabel) -> String {
    label.name(crate::scattering::layout::CoefficientSpelling::SpelledOut)
}

/// Synthesis of flat periodic n × n fields for one (n, J, L, pixel size, settings); owns the
/// differentiable transform (filters and FFT plans).
#[derive(Debug)]
pub struct FlatSynthesis {
    transform: DifferentiableScattering,
    /// Geometry of the periodic tile (a ≡ 1, w ≡ 1, default engine settings) when the
    /// Fourier-cropped path is used.
    cropped: Option<TileGeometry>,
    settings: SynthesisSettings,
    power: Option<PowerTerm>,
    summary: Option<SummaryMap>,
    pixel_size: f64,
}

impl FlatSynthesis {
    /// Build for n × n fields of pixel side `pixel_size` (radians; only scales the power
    /// spectrum), J scales, L orientations. Errors on invalid sizes or settings.
    pub fn new(
        size: usize,
        scale_count: usize,
        orientation_count: usize,
        pixel_size: f64,
        settings: SynthesisSettings,
    ) -> Result<Self> {
        if !(pixel_size.is_finite() && pixel_size > 0.0) {
            return Err(Error::Setting(format!(
                "pixel size must be a positive number of radians, got {}",
                crate::error::compact(pixel_size)
            )));
        }
        settings.check_optimiser()?;
        let transform = DifferentiableScattering::new(size, scale_count, orientation_count)?;
        let summary = match settings.statistics {
            StatisticChoice::Full => None,
            StatisticChoice::Summary => Some(SummaryMap::new(scale_count, orientation_count)?),
        };
        let power = match settings.power_spectrum_bins {
            Some(0) => {
                return Err(Error::Setting(
                    "the power spectrum needs at least 1 bin".into(),
                ))
            }
            Some(count) => Some(PowerTerm::new(size, pixel_size, count)?),
            None => None,
        };
        let cropped = if settings.fourier_cropping && !settings.field_envelope_correlation {
            let ones = vec![1.0; size * size];
            let geometry = transform.tile_geometry(&ones, &ones, &TransformSettings::default())?;
            geometry
                .crop_levels()
                .iter()
                .any(|&d| d > 0)
                .then_some(geometry)
        } else {
            None
        };
        let out = Self {
            transform,
            cropped,
            settings,
            power,
            summary,
            pixel_size,
        };
        if let Normalisation::Given(sigma) = &out.settings.normalisation {
            let want = out.statistic_count();
            if sigma.len() != want {
                return Err(Error::Mismatch(format!(
                    "{} normalisation scales given, the chosen statistics have {want}",
                    sigma.len()
                )));
            }
            if let Some(i) = sigma.iter().position(|s| !(s.is_finite() && *s > 0.0)) {
                return Err(Error::Setting(format!(
                    "normalisation scale {i} must be positive, got {}",
                    crate::error::compact(sigma[i])
                )));
            }
        }
        Ok(out)
    }

    /// The differentiable transform.
    pub fn transform(&self) -> &DifferentiableScattering {
        &self.transform
    }

    /// True when the coefficients are computed on Fourier-cropped grids (module documentation).
    pub fn uses_fourier_cropping(&self) -> bool {
        self.cropped.is_some()
    }

    /// Forward pass of the path in use.
    fn run_forward(&self, field: &[f64]) -> Result<Pass> {
        match &self.cropped {
            None => Ok(Pass::Periodic(self.transform.forward(field)?)),
            Some(geometry) => {
                let pass = self.transform.forward_tile_with(geometry, field)?;
                let coefficients = tile_gradient::pooled_values(&pass.sums);
                Ok(Pass::Tile(pass, coefficients))
            }
        }
    }

    /// The full coefficients of a field (layout of [`DifferentiableScattering::labels`]), with
    /// the path in use.
    pub fn coefficients(&self, field: &[f64]) -> Result<Vec<f64>> {
        Ok(self.run_forward(field)?.coefficients().to_vec())
    }

    /// The settings.
    pub fn settings(&self) -> &SynthesisSettings {
        &self.settings
    }

    /// Field side n.
    pub fn size(&self) -> usize {
        self.transform.size()
    }

    /// Pixel side in radians.
    pub fn pixel_size(&self) -> f64 {
        self.pixel_size
    }

    /// Number of matched statistics.
    pub fn statistic_count(&self) -> usize {
        self.statistic_names().len()
    }

    /// Names of the matched statistics, in order.
    pub fn statistic_names(&self) -> Vec<String> {
        let mut names: Vec<String> = match &self.summary {
            None => self.transform.labels()[1..]
                .iter()
                .map(label_name)
                .collect(),
            Some(m) => m.names(),
        };
        if self.settings.field_envelope_correlation {
            names.extend(
                (0..self.scale_count()).map(|j| format!("field_envelope_correlation_scale_{j}")),
            );
        }
        if let Some(p) = &self.power {
            names.extend((0..p.len()).map(|b| format!("power_bin_{b}")));
        }
        names
    }

    fn select(&self, coefficients: &[f64]) -> Vec<f64> {
        matched_statistics(self.summary.as_ref(), coefficients)
    }

    fn select_adjoint(&self, coefficients: &[f64], ds: &[f64]) -> Vec<f64> {
        matched_statistics_adjoint(self.summary.as_ref(), coefficients, ds)
    }

    fn scale_count(&self) -> usize {
        self.transform.bank().scale_count()
    }

    fn orientation_count(&self) -> usize {
        self.transform.bank().orientation_count()
    }

    /// C_j = (1/L) Σ_l C(j,l) (periodic path only; empty otherwise).
    fn correlations(&self, pass: &Pass) -> Vec<f64> {
        let ln = self.orientation_count();
        match pass {
            Pass::Periodic(p) => p
                .field_envelope
                .chunks(ln)
                .map(|c| c.iter().sum::<f64>() / ln as f64)
                .collect(),
            Pass::Tile(..) => Vec::new(),
        }
    }

    fn statistics_of_pass(&self, pass: &Pass) -> Vec<f64> {
        let mut s = self.select(pass.coefficients());
        if self.settings.field_envelope_correlation {
            s.extend(self.correlations(pass));
        }
        if let Some(p) = &self.power {
            s.extend(p.power(pass.spectrum(&self.transform)));
        }
        s
    }

    /// The matched statistics of a field (chosen set, correlations, power bins).
    pub fn statistics(&self, field: &[f64]) -> Result<Vec<f64>> {
        Ok(self.statistics_of_pass(&self.run_forward(field)?))
    }

    /// Target from a flat map (row-major n × n).
    pub fn target_from_map(&self, values: &[f64]) -> Result<SynthesisTarget> {
        let pass = self.run_forward(values)?;
        let statistics = self.statistics_of_pass(&pass);
        let (mean, sd, m3) = moments(values);
        if sd.is_nan() || sd <= 0.0 {
            return Err(Error::Data(
                "the target map is constant: there is nothing to synthesise".into(),
            ));
        }
        let centred: Vec<f64> = values.iter().map(|v| v - mean).collect();
        let amplitude = self
            .transform
            .square_fft()
            .spectrum_of(&centred)
            .iter()
            .map(|z| z.norm())
            .collect();
        let sigma = self.sigma_for(&statistics, pass.coefficients())?;
        Ok(SynthesisTarget {
            matched: MatchedTarget {
                values: statistics,
                sigma,
                mean,
                standard_deviation: sd,
            },
            spectrum_amplitude: Some(amplitude),
            third_moment_sign: Some(m3.signum()),
        })
    }

    /// Target from full coefficients in the transform's layout (e.g. read by
    /// [`coefficients_from_json`]). The power-spectrum term cannot be used with it.
    pub fn target_from_coefficients(&self, coefficients: &[f64]) -> Result<SynthesisTarget> {
        let variance = checked_target_variance(coefficients, self.transform.labels())?;
        if self.power.is_some() || self.settings.field_envelope_correlation {
            return Err(Error::Setting(
                "the power-spectrum and field-envelope terms need a target map, not a coefficient file".into(),
            ));
        }
        let values = self.select(coefficients);
        let sigma = self.sigma_for(&values, coefficients)?;
        Ok(SynthesisTarget {
            matched: MatchedTarget::of_coefficients(values, sigma, coefficients, variance),
            spectrum_amplitude: None,
            third_moment_sign: None,
        })
    }

    /// σ_i: |t_i|, or the Cauchy–Schwarz bound for the correlations; or the given values.
    fn sigma_for(&self, values: &[f64], coefficients: &[f64]) -> Result<Vec<f64>> {
        if let Normalisation::Given(s) = &self.settings.normalisation {
            return Ok(s.clone());
        }
        let mut sigma: Vec<f64> = values.iter().map(|t| t.abs()).collect();
        if let Some(m) = &self.summary {
            let k = m.len();
            sigma[..k].copy_from_slice(&m.distance_scales(&values[..k]));
        }
        if self.settings.field_envelope_correlation {
            let (jn, ln) = (self.scale_count(), self.orientation_count());
            let start = self.select(coefficients).len();
            for (j, bound) in correlation_bounds(coefficients, jn, ln).enumerate() {
                sigma[start + j] = bound;
            }
        }
        if let Some(i) = sigma.iter().position(|v| v.is_nan() || *v <= 0.0) {
            return Err(Error::Data(format!(
                "target statistic {} is {}: the relative distance is undefined",
                self.statistic_names()[i],
                values[i]
            )));
        }
        Ok(sigma)
    }

    /// Loss L(f) = Σ ((s_i − t_i)/σ_i)² and its gradient ∂L/∂f.
    pub fn loss_and_gradient(
        &self,
        target: &SynthesisTarget,
        field: &[f64],
    ) -> Result<(f64, Vec<f64>)> {
        if target.matched.values.len() != self.statistic_count() {
            return Err(Error::Mismatch(format!(
                "target has {} statistics, the synthesis matches {}",
                target.matched.values.len(),
                self.statistic_count()
            )));
        }
        let sigma = &target.matched.sigma;
        let pass = self.run_forward(field)?;
        let set_len = self.select(pass.coefficients()).len();
        let corr_len = if self.settings.field_envelope_correlation {
            self.scale_count()
        } else {
            0
        };
        let s = self.statistics_of_pass(&pass);
        let spectrum = pass.spectrum(&self.transform);
        let (loss, ds) = relative_loss(&s, &target.matched.values, sigma);
        let dc = self.select_adjoint(pass.coefficients(), &ds[..set_len]);
        let correlation_weights: Option<Vec<f64>> = (corr_len > 0).then(|| {
            let ln = self.orientation_count();
            ds[set_len..set_len + corr_len]
                .iter()
                .flat_map(|d| std::iter::repeat_n(d / ln as f64, ln))
                .collect()
        });
        let mut grad = match &pass {
            Pass::Periodic(p) => {
                self.transform
                    .backward_with_correlations(p, &dc, correlation_weights.as_deref())?
            }
            Pass::Tile(p, _) => {
                let sum_weights = tile_gradient::pooled_values_adjoint(&p.sums, &dc)?;
                self.transform.backward_tile(p, &sum_weights)?
            }
        };
        if let Some(p) = &self.power {
            let c = p.adjoint_multiplier(&ds[set_len + corr_len..]);
            let mut z: Vec<Complex64> = spectrum.iter().zip(&c).map(|(f, c)| f * c).collect();
            self.transform.square_fft().inverse(&mut z);
            for (g, v) in grad.iter_mut().zip(&z) {
                *g += v.re;
            }
        }
        Ok((loss, grad))
    }

    /// The start field of a synthesis (seeded).
    pub fn start_field(
        &self,
        target: &SynthesisTarget,
        start: StartField,
        seed: u64,
    ) -> Result<Vec<f64>> {
        let n = self.size();
        let nn = n * n;
        let mut rng = ChaCha20Rng::seed_from_u64(seed);
        let noise: Vec<f64> = (0..nn).map(|_| StandardNormal.sample(&mut rng)).collect();
        let mut x = match start {
            StartField::White => noise,
            StartField::Gaussian => {
                let amp = target.spectrum_amplitude.as_ref().ok_or_else(|| {
                    Error::Setting(
                        "a Gaussian start needs a target map (its power spectrum); use a white start with a coefficient file".into(),
                    )
                })?;
                colour_noise(self.transform.square_fft(), &noise, amp)
                    .iter()
                    .map(|v| v / target.matched.standard_deviation)
                    .collect()
            }
        };
        let m = x.iter().sum::<f64>() / nn as f64;
        x.iter_mut().for_each(|v| *v -= m);
        Ok(x.iter()
            .map(|v| target.matched.mean + target.matched.standard_deviation * v)
            .collect())
    }

    /// Run the synthesis from the settings' start field.
    pub fn synthesise(&self, target: &SynthesisTarget) -> Result<SynthesisOutcome> {
        let start = self.start_field(target, self.settings.start, self.settings.seed)?;
        self.synthesise_from(target, start)
    }

    /// Run the synthesis from a given start field.
    pub fn synthesise_from(
        &self,
        target: &SynthesisTarget,
        start: Vec<f64>,
    ) -> Result<SynthesisOutcome> {
        let (mu, sd) = (target.matched.mean, target.matched.standard_deviation);
        let x0: Vec<f64> = start.iter().map(|f| (f - mu) / sd).collect();
        let (initial_loss, _) = self.loss_and_gradient(target, &start)?;
        let evaluate = |x: &[f64]| -> Result<(f64, Vec<f64>)> {
            let field: Vec<f64> = x.iter().map(|v| mu + sd * v).collect();
            let (loss, grad_f) = self.loss_and_gradient(target, &field)?;
            Ok((loss, grad_f.iter().map(|g| g * sd).collect()))
        };
        let run = minimise(&evaluate, x0, initial_loss, &self.settings)?;
        let mut field: Vec<f64> = run.best.iter().map(|x| mu + sd * x).collect();
        let mut reflected = false;
        if self.settings.match_sign && !self.settings.field_envelope_correlation {
            if let Some(sign) = target.third_moment_sign {
                let (m, _, m3) = moments(&field);
                if sign != 0.0 && m3.signum() == -sign {
                    field.iter_mut().for_each(|v| *v = 2.0 * m - *v);
                    reflected = true;
                }
            }
        }
        let statistics = self.statistics(&field)?;
        let (final_loss, _) = self.loss_and_gradient(target, &field)?;
        Ok(SynthesisOutcome {
            field,
            start,
            report: OptimisationReport::new(
                run,
                (initial_loss, final_loss),
                statistics,
                (&target.matched.values, &target.matched.sigma),
            ),
            reflected,
        })
    }
}

/// A forward pass of the path in use: periodic full resolution, or the cropped tile estimator
/// with its pooled values.
enum Pass {
    Periodic(ForwardPass),
    Tile(TileForward, Vec<f64>),
}

impl Pass {
    fn coefficients(&self) -> &[f64] {
        match self {
            Pass::Periodic(p) => &p.coefficients,
            Pass::Tile(_, c) => c,
        }
    }

    /// DFT of the mean-removed field (a ≡ 1 on the tile path).
    fn spectrum<'a>(&'a self, transform: &DifferentiableScattering) -> &'a [Complex64] {
        match self {
            Pass::Periodic(p) => transform.centred_spectrum(p),
            Pass::Tile(p, _) => p.spectrum(),
        }
    }
}

/// Colour white noise by the amplitude |F_t(q)|: f̂_q = ŵ_q |F_t(q)| / n, q = 0 set to zero.
fn colour_noise(fft: &SquareFft, noise: &[f64], amplitude: &[f64]) -> Vec<f64> {
    let n = (noise.len() as f64).sqrt();
    let mut w = fft.spectrum_of(noise);
    for (z, a) in w.iter_mut().zip(amplitude) {
        *z *= a / n;
    }
    w[0] = Complex64::default();
    fft.inverse(&mut w);
    w.iter().map(|z| z.re).collect()
}

/// A Gaussian field with the power spectrum of `values` (n × n periodic map): white noise
/// coloured by the map's DFT amplitude (module documentation), plus the map's mean. Seeded.
pub fn gaussian_counterpart(values: &[f64], size: usize, seed: u64) -> Result<Vec<f64>> {
    if values.len() != size * size || size < 2 {
        return Err(Error::Mismatch(format!(
            "map has {} values, expected {size} x {size}",
            values.len()
        )));
    }
    let fft = SquareFft::new(size);
    let (mean, _, _) = moments(values);
    let centred: Vec<f64> = values.iter().map(|v| v - mean).collect();
    let amplitude: Vec<f64> = fft.spectrum_of(&centred).iter().map(|z| z.norm()).collect();
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    let noise: Vec<f64> = (0..size * size)
        .map(|_| StandardNormal.sample(&mut rng))
        .collect();
    Ok(colour_noise(&fft, &noise, &amplitude)
        .iter()
        .map(|v| v + mean)
        .collect())
}

/// Full coefficients (layout of [`DifferentiableScattering::labels`]) from a coefficient JSON
/// document: an object with a `coefficients` array of objects holding `order`, `j1`, `l1`,
/// `j2`, `l2` (null or absent when unused), `value` and, for order 0 and band powers, `kind`
/// (`mean`, `variance`, `first_order`, `band_power`, `second_order`; `scattering` for order 1
/// or 2 as `planisphere measure` writes). Order-1 entries without a kind are first-order
/// coefficients, order-2 entries second-order ones. Entries of an optional `band_powers` array
/// (as `measure` writes them) are band powers.
pub fn coefficients_from_json(
    text: &str,
    scale_count: usize,
    orientation_count: usize,
) -> Result<Vec<f64>> {
    let doc: crate::io::measurement_document::CoefficientArrays = serde_json::from_str(text)
        .map_err(|e| match e.classify() {
            serde_json::error::Category::Data => Error::Data(format!(
                "coefficient file is not a coefficient document: {e}"
            )),
            _ => Error::Data(format!("coefficient file is not valid JSON: {e}")),
        })?;
    let layout = crate::scattering::layout::CoefficientLayout::new(scale_count, orientation_count);
    let transform_labels = layout.labels();
    let mut values = vec![f64::NAN; transform_labels.len()];
    let entries = (doc.coefficients.iter().map(|e| (e, false)))
        .chain(doc.band_powers.iter().map(|e| (e, true)));
    for (k, (entry, in_band_powers)) in entries.enumerate() {
        let bad = |what: &str| Error::Data(format!("coefficient entry {k}: {what}"));
        let label = entry.label(in_band_powers).map_err(|what| bad(&what))?;
        let value = entry
            .value
            .ok_or_else(|| bad("`value` is missing or not a number"))?;
        // Entries beyond the chosen J, L are ignored.
        if let Some(i) = layout.position(&label) {
            values[i] = value;
        }
    }
    if let Some(i) = values.iter().position(|v| v.is_nan()) {
        return Err(Error::Data(format!(
            "coefficient file lacks {} for J = {scale_count}, L = {orientation_count}",
            label_name(&transform_labels[i])
        )));
    }
    Ok(values)
}

/// A point x with its loss and gradient.
type CachedEvaluation = (Vec<f64>, f64, Vec<f64>);

/// A loss-and-gradient function of the optimised variables.
pub(crate) type Objective<'a> = dyn Fn(&[f64]) -> Result<(f64, Vec<f64>)> + Sync + 'a;

/// The loss as an argmin problem; caches the last (x, L, ∇L) because argmin asks for the cost
/// and the gradient of the same point separately, and keeps the best point seen.
struct SynthesisProblem<'a> {
    objective: &'a Objective<'a>,
    cache: Mutex<Option<CachedEvaluation>>,
    best: Mutex<(f64, Vec<f64>)>,
    evaluations: std::sync::atomic::AtomicU64,
}

impl SynthesisProblem<'_> {
    fn evaluate(&self, x: &[f64]) -> std::result::Result<(f64, Vec<f64>), argmin::core::Error> {
        if let Ok(cache) = self.cache.lock() {
            if let Some((cx, l, g)) = cache.as_ref() {
                if cx.as_slice() == x {
                    return Ok((*l, g.clone()));
                }
            }
        }
        let (loss, grad) = (self.objective)(x)?;
        self.evaluations
            .fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        if let Ok(mut cache) = self.cache.lock() {
            *cache = Some((x.to_vec(), loss, grad.clone()));
        }
        if let Ok(mut best) = self.best.lock() {
            if loss.is_finite() && loss < best.0 {
                *best = (loss, x.to_vec());
            }
        }
        Ok((loss, grad))
    }
}

impl CostFunction for &SynthesisProblem<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, x: &Vec<f64>) -> std::result::Result<f64, argmin::core::Error> {
        Ok(self.evaluate(x)?.0)
    }
}

impl Gradient for &SynthesisProblem<'_> {
    type Param = Vec<f64>;
    type Gradient = Vec<f64>;
    fn gradient(&self, x: &Vec<f64>) -> std::result::Result<Vec<f64>, argmin::core::Error> {
        Ok(self.evaluate(x)?.1)
    }
}

/// What [`minimise`] found.
pub(crate) struct Minimisation {
    /// The best point seen (lowest finite loss, the start when nothing improved).
    pub best: Vec<f64>,
    /// Best loss after every iteration.
    pub history: Vec<f64>,
    /// Iterations done.
    pub iterations: u64,
    /// Loss-and-gradient evaluations (line-search trials included).
    pub evaluations: u64,
    /// Why the optimiser stopped.
    pub termination: String,
}

/// The loss L = Σ_i ((s_i − t_i)/σ_i)² of statistics s against the target t, and its
/// derivatives ∂L/∂s_i = 2 (s_i − t_i)/σ_i².
pub(crate) fn relative_loss(statistics: &[f64], target: &[f64], sigma: &[f64]) -> (f64, Vec<f64>) {
    let mut loss = 0.0;
    let mut ds = Vec::with_capacity(statistics.len());
    for ((si, ti), sg) in statistics.iter().zip(target).zip(sigma) {
        let r = (si - ti) / sg;
        loss += r * r;
        ds.push(2.0 * r / sg);
    }
    (loss, ds)
}

/// Per scale j: the Cauchy–Schwarz bound √(σ² · P̄_j) of the field–envelope correlation
/// |⟨(f − μ)|f∗ψ_j|⟩| ≤ √(⟨(f − μ)²⟩ ⟨|f∗ψ_j|²⟩), with σ² the variance (coefficient 1) and
/// P̄_j = (1/L) Σ_l P(j, l) from full coefficients in the layout of J scales, L orientations.
pub(crate) fn correlation_bounds(
    coefficients: &[f64],
    jn: usize,
    ln: usize,
) -> impl Iterator<Item = f64> + '_ {
    let layout = crate::scattering::layout::CoefficientLayout::new(jn, ln);
    (0..jn).map(move |j| {
        let p = (0..ln)
            .map(|l| coefficients[layout.band_power(j, l)])
            .sum::<f64>()
            / ln as f64;
        (coefficients[1] * p).sqrt()
    })
}

/// max_i |s_i − t_i| / σ_i: the largest deviation of the statistics s from the target t in
/// units of σ.
pub(crate) fn max_relative_deviation(statistics: &[f64], target: &[f64], sigma: &[f64]) -> f64 {
    statistics
        .iter()
        .zip(target)
        .zip(sigma)
        .map(|((s, t), sg)| ((s - t) / sg).abs())
        .fold(0.0, f64::max)
}

/// Minimises `objective` from `x0` (whose loss is `initial_loss`) by L-BFGS with the settings'
/// `memory` correction pairs (Nocedal & Wright 2006, Alg. 7.4/7.5) and the Moré–Thuente line
/// search (Moré & Thuente 1994), from the `argmin` crate, for at most the settings'
/// `iterations` iterations, with a progress bar showing the loss (stderr) when `progress` is on.
pub(crate) fn minimise(
    objective: &Objective<'_>,
    x0: Vec<f64>,
    initial_loss: f64,
    settings: &SynthesisSettings,
) -> Result<Minimisation> {
    let (iterations, memory, progress) = (settings.iterations, settings.memory, settings.progress);
    let problem = SynthesisProblem {
        objective,
        cache: Mutex::new(None),
        best: Mutex::new((initial_loss, x0.clone())),
        evaluations: std::sync::atomic::AtomicU64::new(0),
    };
    let history = Arc::new(Mutex::new(Vec::new()));
    let bar = if progress {
        let b = indicatif::ProgressBar::new(iterations);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "synthesis {bar:30} {pos}/{len} iterations, loss {msg}",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    let observer = LossObserver {
        bar: bar.clone(),
        history: Arc::clone(&history),
    };
    let line_search = MoreThuenteLineSearch::new();
    let solver = LBFGS::new(line_search, memory)
        .with_tolerance_grad(1e-12)
        .and_then(|s| s.with_tolerance_cost(1e-14))
        .map_err(|e| Error::Setting(format!("L-BFGS settings: {e}")))?;
    let run = Executor::new(&problem, solver)
        .configure(|state| state.param(x0).max_iters(iterations))
        .add_observer(observer, ObserverMode::Always)
        .run();
    bar.finish_and_clear();
    let (termination, done) = match &run {
        Ok(r) => (
            r.state().get_termination_status().to_string(),
            r.state().get_iter(),
        ),
        Err(e) => (format!("stopped by the line search: {e}"), 0),
    };
    let history = history.lock().map(|h| h.clone()).unwrap_or_default();
    let best = problem
        .best
        .lock()
        .map(|b| b.1.clone())
        .map_err(|_| Error::Data("synthesis state was poisoned".into()))?;
    Ok(Minimisation {
        best,
        iterations: if done > 0 { done } else { history.len() as u64 },
        history,
        evaluations: problem
            .evaluations
            .load(std::sync::atomic::Ordering::Relaxed),
        termination,
    })
}

/// Progress bar and loss history, updated after every iteration.
struct LossObserver {
    bar: indicatif::ProgressBar,
    history: Arc<Mutex<Vec<f64>>>,
}

impl<I: State<Float = f64>> Observe<I> for LossObserver {
    fn observe_iter(
        &mut self,
        state: &I,
        _kv: &KV,
    ) -> std::result::Result<(), argmin::core::Error> {
        let loss = state.get_best_cost();
        self.bar.set_position(state.get_iter());
        self.bar.set_message(format!("{loss:.4e}"));
        if let Ok(mut h) = self.history.lock() {
            h.push(loss);
        }
        Ok(())
    }
}
