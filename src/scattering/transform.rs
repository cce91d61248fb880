//! The scattering transform of one square tile, and the engine object shared by all tiles.
//!
//! # What is computed
//!
//! A tile is an n × n plane grid holding the field f(x), an apodized taper a(x) ∈ [0, 1]
//! (applied to the field before filtering, zero outside the footprint) and a pooling weight
//! w(x) ≥ 0 (zero where the pixel must not count). With ψ_{j,l} the Morlet bank of
//! [`crate::scattering::filters`] and ⟨·⟩ the w-weighted spatial mean over trusted pixels (below), the tile
//! yields: order 0, the weighted mean and variance of f; order 1, S1(j,l) = ⟨|I∗ψ_{j,l}|⟩ and the
//! band power P(j,l) = ⟨|I∗ψ_{j,l}|²⟩; order 2, S2(j1,l1,j2,l2) = ⟨||I∗ψ_{j1,l1}|∗ψ_{j2,l2}|⟩
//! for j2 > j1. Each is returned as a weighted *sum* plus the weight it was pooled with, so that
//! tiles combine exactly (see [`crate::scattering::pooling`]).
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
//!    anyway (step 3). N_j is obtained by one real FFT of a² and, per scale, one
//!    complex-to-real inverse FFT at full resolution.
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
//! # Cross statistics of two maps
//!
//! Two maps A and B (e.g. lensing convergence and galaxy density) are measured on one tile with
//! a common taper a and pooling weight w ([`TilePairView`]): their footprint is the intersection
//! of the two, so both fields see the same coverage N_j, the same trust cuts W_j, W_{j1,j2} and
//! the same Fourier cropping as the auto path above. With I_X = a(f_X − μ_{a,X}),
//! g^X_{j,l} = I_X∗ψ_{j,l} and the normalised modulus U^X_{j,l} = |g^X_{j,l}|/√N_j (X = A, B):
//!
//! * **cross band power** P_AB(j,l) = ⟨Re[g^A_{j,l} · conj(g^B_{j,l})] / N_j⟩_{W_j}. It is the
//!   band power of the auto path with one factor replaced by the other map, so P_AA = P(j,l)
//!   (equal to rounding), it is bilinear (P_{A,cB} = c·P_AB) and E\[P_AB\] is the Parseval sum
//!   Σ_q P_AB(q) |ψ̂_{j,l}(q)|² of the cross spectrum in the band (Wiener–Khinchin for the
//!   cross-correlation, common practice). The same coverage normalisation as the auto band
//!   power makes it unbiased away from edges for jointly stationary fields.
//! * **one map against the other's modulus**, order 1:
//!   X1_{A←B}(j,l) = ⟨I_A^{(j)} · (U^B_{j,l} − μ_{U^B})⟩_{W_j}, with μ_{U^B} the tile's
//!   taper-weighted mean of U^B_{j,l} (the mean the second order of B subtracts) and I_A^{(j)}
//!   the filter input of A low-passed to the Fourier box of scale j (on the uncropped grid
//!   I_A itself; the pooled product only sees the band of the envelope U^B, so the low-pass
//!   changes it only by the part of U^B outside the box, as for the auto path). It is the
//!   covariance of map A with the local amplitude of map B's fluctuations at scale j: large-scale
//!   A modulating small-scale B (a squeezed-bispectrum-like cross moment; units of A times B).
//!   X1_{B←A} swaps the maps.
//! * **one map against the other's modulus**, order 2, j2 > j1:
//!   X2_{A←B}(j1,l1,j2,l2) = ⟨Re[(I_A∗ψ_{j2,l2}) · conj(Ĩ^B_{j1,l1}∗ψ_{j2,l2})] / N_{j2}⟩_{W_{j1,j2}},
//!   Ĩ^B_{j1,l1} = a·(U^B_{j1,l1} − μ_{U^B}): the cross band power, at scale j2, of map A with the
//!   envelope of B at scale j1 — the auto S2 input of B against A's own first-layer field at
//!   (j2, l2). X2_{B←A} swaps the maps.
//!
//! No further normalisation is applied (values carry the units of A·B); a dimensionless
//! correlation coefficient is P_AB / √(P_AA P_BB). Expectations (checked in
//! `tests/scattering_cross.rs`): for independent fields every cross statistic vanishes (one
//! factor has zero mean and is independent of the other); for Gaussian fields X1 and X2 vanish
//! also when A = B (they are odd in I under I → −I, which leaves U unchanged); for
//! B = r·A + √(1−r²)·Y with Y independent of A and of A's spectrum, E\[P_AB\] = r·√(E P_AA · E P_BB).
//!
//! Cost: the first-layer fields g^A, g^B and the second-layer fields of both auto transforms are
//! reused; beyond two auto transforms with a shared coverage, the cross set needs one inverse
//! FFT per map and crop level (the low-passed inputs) and products only.
//!
//! # Fourier cropping (speed)
//!
//! Each layer is computed on the grid its band needs. A grid of level d is the tile subsampled
//! by 2^d (side m = n/2^d); the samples of a band-pass field g = I∗ψ_{j,l} at every 2^d-th pixel
//! are obtained by one inverse DFT of size m of the m × m bins of the spectrum that hold ψ̂_{j,l},
//! and are exact as long as ψ̂ vanishes outside those bins.
//!
//! * **Boxes centred on the band** (`shifted_boxes`, default). A Morlet ψ̂_{j,l} is a Gaussian
//!   bump at ξ_{j,l} ≠ 0 (plus the small zero-mean term −β ĝ at the origin), and
//!   |g(x)| = |g(x) e^{−iq₀·x}|: the box is the block of bins q₀ + p, p ∈ (−m/2, m/2)²,
//!   around the bin q₀ where |ψ̂_{j,l}| peaks, and the inverse DFT of size m gives the field
//!   demodulated by q₀, whose modulus is |g| at the coarse pixels. The box then needs only the
//!   envelope's bandwidth, not |ξ| plus the bandwidth. Two fields filtered by the same wavelet
//!   carry the same phase factor, so the cross products Re[g_A conj(g_B)] are unchanged too.
//!   (`shifted_boxes: false`: boxes centred on the origin with zeroed Nyquist lines.)
//! * **Levels.** The band level b_j is the largest level whose (centred) box holds every ψ̂_{j,l}
//!   to `crop_tolerance` (default 2e-3) of its peak; b_j = j − 1 for σ_j = 0.8·2^j (what is left
//!   outside is the tail of the β term near the box edge closest to the origin, between 5e-4
//!   and 2e-3 of the peak for L = 3 to 8, hence the tolerance; at 1e-6 b_j = j − 2). The
//!   modulus |g| is not band-limited (its spectrum has power-law tails from the zeros of g).
//!   The **second layer** of (j1 → j2), whose modulus is only pooled, is computed at
//!   d′_{j2} = b_{j2} − `modulus_oversampling` (default 0) = j2 − 1: the sampling error of a
//!   weighted mean is within the budget (below). The **first layer** at d_j = d′_j −
//!   `first_layer_oversampling` (default 2) = j − 3, because U_{j1} is filtered again at order
//!   2 and its sampling error reaches the second layer's band (with d_j = j − 2, order 2 at
//!   j1 = 3, 4 exceeded the budget). Grids are kept at 64 pixels or more (32 on tiles under
//!   128 pixels): below that, pooling next to sharp trust-mask edges exceeded the budget
//!   (1.6e-3 at 128² with holes on 32² grids). Levels are non-decreasing in j. For n = 256,
//!   J = 6, L = 4: first layer 0,0,0,0,1,2, second layer 0,0,1,2,2,2 (origin-centred boxes at
//!   tolerance 1e-6: 0,0,0,0,1,2 for both); n = 128, J = 6: 0,0,0,0,1,1 and 0,0,1,1,1,1.
//! * **Grids of the other quantities.** The second-layer input a·(U − μ_U) lives on the
//!   first-layer grid of j1; its spectrum (real-to-complex) feeds the boxes of every j2 > j1.
//!   The coverage normalisation c_j is sampled on both grids of j; the pooling weight of order 1
//!   is W_j low-passed to the first-layer level, that of order 2 is W_{j1,j2} low-passed to the
//!   second-layer level of j2 (Σ_x W h = 4^d Σ_X W_lp h, exact for h band-limited to the box).
//!   The coverage inverses and the weight low-passes are complex-to-real transforms of
//!   Hermitian spectra.
//!
//! # Error budget
//!
//! Measured against the full-resolution path of the same estimator (`fourier_cropping: false`)
//! in `tests/scattering_cropping.rs`: n = 128 and 256, J = 5 and 6, L = 4 and 3, white and red
//! Gaussian fields (4 per case), periodic and with two holes and an 8-pixel C2 border. Budget:
//! every coefficient within 1e-3 relative AND within 0.1 of its single-sky scatter (standard
//! deviation over the 4 fields). Measured worst: relative 7.2e-4 (order 2, 256², L = 3, red,
//! holes; on coefficients flagged untrusted 2.3e-4), 4.0e-2 of the scatter (order 2, 128²,
//! L = 4, red, holes); orders 0 and 1 are far smaller. For comparison: the earlier levels
//! (origin-centred boxes, tolerance 1e-6, d_j = j − 3 for both layers) 2.3e-4; the second layer
//! one level finer (`modulus_oversampling` 1) 3.6e-4 and 3.7e-2 of the scatter; the first layer
//! at j − 2 1.2e-3; 32² grids 1.6e-3 on untrusted coefficients. Against the numpy reference
//! of `tests/scattering_reference.rs` (periodic, smaller tiles than the budget covers, limit
//! 1e-3 there): 5.8e-4 at 64², J = 5, L = 4 (three scales cropped); 32² tiles are not cropped.
//!
//! # Work and memory
//!
//! Per tile and field: one real FFT of the input at full size; J·L inverse FFTs for order 1
//! (at the first-layer sizes); for order 2 one real FFT per (j1, l1) at the first-layer size of
//! j1 and one inverse FFT per (j1, l1, j2, l2) at the second-layer size of j2. Shared: one real
//! FFT of a² and J complex-to-real inverses at full size (coverage), and per pooling weight on a
//! coarse level one real FFT at full size and one complex-to-real inverse at the coarse size.
//! The exact list is [`ScatteringEngine::fft_census`]. For n = 256, J = 5, L = 4 the census
//! drops from 141 to 62 full-size complex FFT equivalents (m² log m, half for real-data
//! transforms); measured per-tile times are in `examples/per_scale_timing.rs` and docs/benchmarks.md.
//! Memory is a few n² arrays plus the pooling weights, independent of the number of tiles.

use crate::scattering::fft::{signed_frequency, SquareFft, SquareFftPlanner};
use crate::scattering::filters::MorletBank;
use crate::scattering::pooling::{PairTileSums, SumLabels, TileSums};
use crate::scattering::statistics::{CoefficientLabel, CrossLabel};
use crate::{Error, Result};
use num_complex::Complex64;
use rayon::prelude::*;
use std::time::{Duration, Instant};

/// Floor applied to the coverage N before dividing by √N (only matters far outside the trusted
/// region, where the pooling weight is zero).
pub(crate) const COVERAGE_FLOOR: f64 = 0.01;

/// Default `crop_tolerance` (module documentation, "Fourier cropping").
pub const DEFAULT_CROP_TOLERANCE: f64 = 2e-3;

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
    /// Relative size of the filters allowed outside a cropped Fourier box. Default 2e-3
    /// ([`DEFAULT_CROP_TOLERANCE`]).
    pub crop_tolerance: f64,
    /// Number of extra factors of 2 by which the pooled modulus |g| of every layer is sampled
    /// more finely than the band of the filter requires (the modulus is not band-limited).
    /// Default 0 (measured within the error budget with band-centred boxes; the
    /// origin-centred rule used 1).
    pub modulus_oversampling: usize,
    /// Centre each cropped Fourier box on the wavelet's own central frequency (the box then
    /// needs to hold only the envelope's bandwidth; |g| is unchanged by the shift) instead of
    /// on the origin. Default true; false gives the origin-centred boxes.
    pub shifted_boxes: bool,
    /// Extra factors of 2 by which the first layer |I∗ψ_{j1,l1}| is sampled more finely than the
    /// second layer at the same scale: the first-layer modulus is filtered again at order 2, so
    /// its sampling error reaches the second layer's band. Default 2.
    pub first_layer_oversampling: usize,
}

impl Default for TransformSettings {
    fn default() -> Self {
        Self {
            coverage_threshold: 0.9,
            trusted_fraction: 0.5,
            fourier_cropping: true,
            crop_tolerance: DEFAULT_CROP_TOLERANCE,
            modulus_oversampling: 0,
            shifted_boxes: true,
            first_layer_oversampling: 2,
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

/// Two maps on one tile: both fields share the taper (the apodized intersection of the two
/// footprints) and the pooling weight; arrays as in [`TileView`].
#[derive(Debug, Clone, Copy)]
pub struct TilePairView<'a> {
    /// Field values of the first map, f_A(x).
    pub first: &'a [f64],
    /// Field values of the second map, f_B(x).
    pub second: &'a [f64],
    /// Common apodized taper a(x) ∈ [0, 1].
    pub taper: &'a [f64],
    /// Common pooling weight w(x) ≥ 0.
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

/// One kind of 2-D transform and how many of it a tile call performs
/// ([`ScatteringEngine::fft_census`]).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct FftCount {
    /// Side m of the m × m transform.
    pub size: usize,
    /// A real-data transform (real-to-complex half spectrum forward, or complex-to-real
    /// inverse); false for a complex-to-complex transform.
    pub real_input: bool,
    /// Inverse (frequency → pixels) rather than forward.
    pub inverse: bool,
    /// Number of such transforms.
    pub count: usize,
}

/// Add one transform of a kind to a census kept in first-seen order.
fn add_to_census(census: &mut Vec<FftCount>, size: usize, real_input: bool, inverse: bool) {
    add_many_to_census(census, size, real_input, inverse, 1);
}

fn add_many_to_census(
    census: &mut Vec<FftCount>,
    size: usize,
    real_input: bool,
    inverse: bool,
    count: usize,
) {
    if count == 0 {
        return;
    }
    match census
        .iter_mut()
        .find(|c| c.size == size && c.real_input == real_input && c.inverse == inverse)
    {
        Some(c) => c.count += count,
        None => census.push(FftCount {
            size,
            real_input,
            inverse,
            count,
        }),
    }
}

/// Census order: larger transforms first, then complex before real, forward before inverse.
fn sort_census(census: &mut [FftCount]) {
    census.sort_by(|a, b| {
        b.size
            .cmp(&a.size)
            .then(a.real_input.cmp(&b.real_input))
            .then(a.inverse.cmp(&b.inverse))
    });
}

/// Runs `transform` with the clock on; returns its result, the FFT time and the census of the
/// transforms it performed (in census order).
fn profiled<T>(
    transform: impl FnOnce(&mut FftClock) -> Result<T>,
) -> Result<(T, FftTiming, Vec<FftCount>)> {
    let mut clock = FftClock::new(true);
    let result = transform(&mut clock)?;
    sort_census(&mut clock.census);
    Ok((result, clock.timing, clock.census))
}

struct FftClock {
    on: bool,
    timing: FftTiming,
    census: Vec<FftCount>,
}

impl FftClock {
    fn new(on: bool) -> Self {
        Self {
            on,
            timing: FftTiming::default(),
            census: Vec::new(),
        }
    }
    fn start(&self) -> Option<Instant> {
        if self.on {
            Some(Instant::now())
        } else {
            None
        }
    }
    fn stop(&mut self, t: Option<Instant>, size: usize, real_input: bool, inverse: bool) {
        if let Some(t) = t {
            self.timing.fft_time += t.elapsed();
            add_to_census(&mut self.census, size, real_input, inverse);
        }
        self.timing.fft_count += 1;
    }
}

/// Owns the filter bank, the FFT plans of every grid level and the crop levels; built once for
/// (n, J, L) and shared by reference across tiles and threads (it is `Send + Sync`, every call
/// allocates its own scratch, so results do not depend on scheduling).
pub struct ScatteringEngine {
    bank: MorletBank,
    settings: TransformSettings,
    /// First-layer level of each scale.
    levels: Vec<usize>,
    /// Second-layer (output) level of each scale, ≥ the first-layer level.
    second_levels: Vec<usize>,
    /// FFT plans of each level d (grid side n/2^d).
    plans: Vec<SquareFft>,
    /// `level_wavelets[d][j·L + l]`: ψ̂_{j,l} cropped to the (n/2^d)² box (empty for d = 0,
    /// which reads the bank, and for d > d_j).
    level_wavelets: Vec<Vec<Vec<f64>>>,
    /// First-layer boxes per (j, l) and second-layer boxes per (d_src, j, l) ([`band_boxes`]).
    boxes: Boxes,
    coverage_kernels: Vec<Vec<f64>>,
    labels: Vec<CoefficientLabel>,
    cross_labels: Vec<CrossLabel>,
}

impl std::fmt::Debug for ScatteringEngine {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let mut d = f.debug_struct("ScatteringEngine");
        self.bank.debug_shape(&mut d);
        d.field("first_layer_levels", &self.levels)
            .field("levels", &self.second_levels)
            .field("settings", &self.settings)
            .finish()
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

/// Centre of each wavelet's band on the n × n DFT grid: the bin (q_x, q_y) where |ψ̂_{j,l}| peaks
/// (first in row-major order on a tie), index j·L + l.
pub(crate) fn band_centres(bank: &MorletBank) -> Vec<(i64, i64)> {
    let n = bank.size();
    let mut centres = Vec::new();
    for j in 0..bank.scale_count() {
        for l in 0..bank.orientation_count() {
            let psi = bank.wavelet(j, l);
            let mut best = 0;
            for (i, v) in psi.iter().enumerate() {
                if v.abs() > psi[best].abs() {
                    best = i;
                }
            }
            centres.push((signed_frequency(best % n, n), signed_frequency(best / n, n)));
        }
    }
    centres
}

/// Which bins of an m_src × m_src spectrum make up the m × m spectrum of a coarser (or equal)
/// grid, for one wavelet.
///
/// * No centre: the central box (the crop [`crop_box`]; its Nyquist row and column are zero
///   when m < m_src), or the whole spectrum when m = m_src.
/// * Centre q₀ (in bins of the n-grid): the bins q₀ + p, p ∈ (−m/2, m/2)², taken modulo m_src
///   (the output line p = −m/2 is zero).
///   Output bin p holds the input at frequency q₀ + p, so the inverse DFT of size m gives
///   g(2^d X)·exp(−2πi q₀·2^d X / n): the band-pass field demodulated by its central
///   frequency, whose modulus is |g| at the coarse pixels (exact when ψ̂ vanishes outside the
///   box). Two fields filtered by the same wavelet carry the same phase factor, so products
///   g_A·conj(g_B) are unchanged too.
#[derive(Debug, Clone)]
pub(crate) struct BandBox {
    m_src: usize,
    m: usize,
    identity: bool,
    /// Source row of each output row (None: zero row).
    rows: Vec<Option<usize>>,
    /// Source column of each output column (None: zero column).
    cols: Vec<Option<usize>>,
}

impl BandBox {
    pub(crate) fn new(m_src: usize, m: usize, centre: Option<(i64, i64)>) -> Self {
        // The line p = −m/2 is left out (zero), so that the box is symmetric about q₀ and
        // rotations of the grid by quarter turns map boxes onto boxes.
        let axis = |c: i64| -> Vec<Option<usize>> {
            (0..m)
                .map(|i| {
                    let p = signed_frequency(i, m);
                    (i != m / 2).then(|| (c + p).rem_euclid(m_src as i64) as usize)
                })
                .collect()
        };
        match centre {
            Some((cx, cy)) => Self {
                m_src,
                m,
                identity: false,
                rows: axis(cy),
                cols: axis(cx),
            },
            None => {
                let central: Vec<Option<usize>> = (0..m)
                    .map(|i| (m == m_src || i != m / 2).then(|| fine_index(i, m, m_src)))
                    .collect();
                Self {
                    m_src,
                    m,
                    identity: m == m_src,
                    rows: central.clone(),
                    cols: central,
                }
            }
        }
    }

    /// out[p] = spec[s(p)] · ψ̂[s(p)] with s the source bin of output bin p (ψ̂ on the source grid).
    pub(crate) fn gather(&self, spec: &[Complex64], psi: &[f64], out: &mut Vec<Complex64>) {
        out.clear();
        if self.identity {
            out.extend(spec.iter().zip(psi).map(|(s, p)| s * p));
            return;
        }
        let zero = Complex64::default();
        for row in &self.rows {
            match row {
                None => out.extend(std::iter::repeat_n(zero, self.m)),
                Some(sy) => {
                    let base = sy * self.m_src;
                    out.extend(self.cols.iter().map(|col| match col {
                        None => zero,
                        Some(sx) => spec[base + sx] * psi[base + sx],
                    }));
                }
            }
        }
    }

    /// Adjoint of [`Self::gather`] in its spectrum: target[s(p)] += ψ̂[s(p)] · ȳ[p].
    pub(crate) fn scatter_add(&self, target: &mut [Complex64], psi: &[f64], adjoint: &[Complex64]) {
        if self.identity {
            for ((t, a), p) in target.iter_mut().zip(adjoint).zip(psi) {
                *t += a * p;
            }
            return;
        }
        for (row, chunk) in self.rows.iter().zip(adjoint.chunks(self.m)) {
            let Some(sy) = row else { continue };
            let base = sy * self.m_src;
            for (col, a) in self.cols.iter().zip(chunk) {
                if let Some(sx) = col {
                    target[base + sx] += a * psi[base + sx];
                }
            }
        }
    }
}

/// The boxes used by the transform, centred on the band (module documentation) when the
/// settings ask for shifted boxes and the target level is above 0: per (j, l) (index j·L + l)
/// the first layer's, from the n-grid to the first-layer level of j; and `[d_src][j·L + l]`
/// the second layer's, from level d_src to the second-layer level of j (None for d_src above
/// it).
pub(crate) type Boxes = (Vec<BandBox>, Vec<Vec<Option<BandBox>>>);

/// Build the [`Boxes`] of a bank for its first-layer and second-layer levels.
pub(crate) fn band_boxes(
    bank: &MorletBank,
    first_levels: &[usize],
    second_levels: &[usize],
    settings: &TransformSettings,
) -> Boxes {
    let n = bank.size();
    let big_l = bank.orientation_count();
    let centres = band_centres(bank);
    let shift = |d: usize, i: usize| (settings.shifted_boxes && d > 0).then_some(centres[i]);
    let first = (0..first_levels.len() * big_l)
        .map(|i| {
            let d = first_levels[i / big_l];
            BandBox::new(n, n >> d, shift(d, i))
        })
        .collect();
    let top = second_levels.iter().copied().max().unwrap_or(0);
    let second = (0..=top)
        .map(|d_src| {
            (0..second_levels.len() * big_l)
                .map(|i| {
                    let d = second_levels[i / big_l];
                    (d_src <= d).then(|| BandBox::new(n >> d_src, n >> d, shift(d, i)))
                })
                .collect()
        })
        .collect();
    (first, second)
}

/// Checks a tile's taper a ∈ [0, 1] and pooling weight w ≥ 0 (n × n, finite) and returns
/// (Σw, Σa), refusing tiles with nothing to pool or nothing to filter.
pub(crate) fn check_taper_and_weight(a: &[f64], w: &[f64], n: usize) -> Result<(f64, f64)> {
    let nn = n * n;
    check_values("taper", a, nn, n)?;
    check_values("weight", w, nn, n)?;
    if let Some(i) = a.iter().position(|&a| !(0.0..=1.0).contains(&a)) {
        return Err(Error::Data(format!(
            "tile taper must lie in [0, 1], got {} at pixel {i}",
            crate::error::compact(a[i])
        )));
    }
    if let Some(i) = w.iter().position(|&w| w < 0.0) {
        return Err(Error::Data(format!(
            "tile pooling weight must be non-negative, got {} at pixel {i}",
            crate::error::compact(w[i])
        )));
    }
    let sw: f64 = w.iter().sum();
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
    Ok((sw, sa))
}

/// Per j1, per j2 > j1: the weight W_{j1,j2} = w·[N_{j1} ≥ τ]·[N_{j2} ≥ τ] (w where both scales
/// are trusted) passed through `low_pass(W, j2)` (to the second-layer grid of j2), and Σ W_{j1,j2}.
pub(crate) fn pair_trusted_weights(
    w: &[f64],
    trust: &[Vec<bool>],
    mut low_pass: impl FnMut(&[f64], usize) -> Vec<f64>,
) -> Vec<Vec<(Vec<f64>, f64)>> {
    let big_j = trust.len();
    (0..big_j)
        .map(|j1| {
            ((j1 + 1)..big_j)
                .map(|j2| {
                    let wp: Vec<f64> = (0..w.len())
                        .map(|i| {
                            if trust[j1][i] && trust[j2][i] {
                                w[i]
                            } else {
                                0.0
                            }
                        })
                        .collect();
                    let total = wp.iter().sum::<f64>();
                    (low_pass(&wp, j2), total)
                })
                .collect()
        })
        .collect()
}

pub(crate) fn check_values(name: &str, values: &[f64], len: usize, n: usize) -> Result<()> {
    if values.len() != len {
        return Err(Error::Mismatch(format!(
            "tile {name} has {} values, expected {len} for a {n} x {n} tile",
            values.len()
        )));
    }
    crate::error::check_finite(values, |i| {
        format!(
            "tile {name} holds a non-finite value ({}) at pixel {i}",
            values[i]
        )
    })?;
    Ok(())
}

/// Check the ranges of the estimator settings ([`Error::Setting`] on a value out of range).
pub(crate) fn validate_settings(settings: &TransformSettings) -> Result<()> {
    if !(settings.coverage_threshold > 0.0 && settings.coverage_threshold <= 1.0) {
        return Err(Error::Setting(format!(
            "coverage threshold must be in (0, 1], got {}",
            crate::error::compact(settings.coverage_threshold)
        )));
    }
    if !(0.0..=1.0).contains(&settings.trusted_fraction) {
        return Err(Error::Setting(format!(
            "trusted fraction must be in [0, 1], got {}",
            crate::error::compact(settings.trusted_fraction)
        )));
    }
    if !(settings.crop_tolerance > 0.0 && settings.crop_tolerance < 1.0) {
        return Err(Error::Setting(format!(
            "crop tolerance must be in (0, 1), got {}",
            crate::error::compact(settings.crop_tolerance)
        )));
    }
    Ok(())
}

/// Crop level d_j of every scale for a bank and settings (module documentation, "Fourier
/// cropping"), made non-decreasing in j; all zero without cropping. Origin-centred boxes: the
/// largest d ≤ j (coarse grids of at least 8 pixels) whose central box holds ψ̂_{j,l} and
/// FT|ψ_{j,l}|² to the crop tolerance, minus the modulus oversampling. Shifted boxes: the
/// largest d whose box centred on the band holds ψ̂_{j,l}, minus the modulus oversampling,
/// with grids of at least 64 pixels (32 on tiles under 128 pixels). `extra` further levels
/// finer: 0 for the second layer, `first_layer_oversampling` for the first.
pub(crate) fn crop_levels_for(
    bank: &MorletBank,
    settings: &TransformSettings,
    extra: usize,
) -> Vec<usize> {
    let n = bank.size();
    let scale_count = bank.scale_count();
    // Coarse grids of at least 8 pixels.
    let max_level = crate::scattering::filters::coarsest_level(n, 8);
    // With shifted boxes, computed grids of at least 64 pixels (32 on tiles under 128
    // pixels): pooling next to sharp trust-mask edges on fewer samples exceeds the error
    // budget (module documentation).
    let finest_cap = if n >= 128 {
        crate::scattering::filters::coarsest_level(n, 64)
    } else {
        crate::scattering::filters::coarsest_level(n, 32)
    };
    let centres = band_centres(bank);
    let big_l = bank.orientation_count();
    let tol = settings.crop_tolerance;
    let mut levels = Vec::with_capacity(scale_count);
    for j in 0..scale_count {
        let mut chosen = 0;
        if settings.fourier_cropping {
            for d in (1..=j.min(max_level)).rev() {
                let m = n >> d;
                let fits = if settings.shifted_boxes {
                    (0..big_l).all(|l| {
                        within_box(
                            bank.size(),
                            bank.wavelet(j, l),
                            m,
                            centres[j * big_l + l],
                            tol,
                        )
                    })
                } else {
                    ScatteringEngine::fits_in_box(bank, j, m, tol)
                };
                if fits {
                    chosen = d.saturating_sub(settings.modulus_oversampling + extra);
                    break;
                }
            }
            if settings.shifted_boxes {
                chosen = chosen.min(finest_cap);
            }
        }
        let previous = levels.last().copied().unwrap_or(0);
        levels.push(chosen.max(previous));
    }
    levels
}

/// True when the n × n Fourier array is below `tol` of its peak outside the box of bins
/// q₀ + p, p ∈ (−m/2, m/2)² (distances taken modulo n).
fn within_box(n: usize, arr: &[f64], m: usize, centre: (i64, i64), tol: f64) -> bool {
    let peak = arr.iter().fold(0.0f64, |p, v| p.max(v.abs()));
    let half = (m / 2) as i64;
    let offset =
        |q: i64, c: i64| -> i64 { (q - c + n as i64 / 2).rem_euclid(n as i64) - n as i64 / 2 };
    (0..n * n).all(|i| {
        let dx = offset(signed_frequency(i % n, n), centre.0);
        let dy = offset(signed_frequency(i / n, n), centre.1);
        let inside = dx.abs() < half && dy.abs() < half;
        inside || arr[i].abs() <= tol * peak
    })
}

/// One field's order-0 sums and the input of its filters (the first step of the estimator).
struct FieldInput {
    /// Σ w f and Σ w f².
    order_zero: (f64, f64),
    /// I = a(f − μ_a) at full resolution.
    input: Vec<f64>,
    /// The DFT of I.
    spectrum: Vec<Complex64>,
}

/// What every field of one tile shares: coverage corrections, pooling weights and tapers.
struct TileTerms {
    /// 1/√N_j on the first-layer grid of each scale j.
    coverage_first: Vec<Vec<f64>>,
    /// 1/√N_j on the second-layer grid of each scale j.
    coverage_second: Vec<Vec<f64>>,
    /// W_j (w where scale j is trusted) low-passed to the first-layer grid of j.
    first_weights: Vec<Vec<f64>>,
    /// Σ W_j at full resolution.
    first_trusted: Vec<f64>,
    /// Per j1, per j2 > j1: W_{j1,j2} low-passed to the second-layer grid of j2, and its sum.
    pair_weights: Vec<Vec<(Vec<f64>, f64)>>,
    /// The taper subsampled to each level up to the coarsest first-layer level.
    tapers: Vec<Vec<f64>>,
}

/// One field's g_{j,l} on the second-layer grid of j, index j·L + l: `None` where that grid
/// is the first-layer one (the first-layer g serves).
type SecondGridLayer = Vec<Option<Vec<Complex64>>>;

/// Coverage of one tile per scale j: the trust mask N_j ≥ τ and 1/√N_j on the grids of j.
/// (The differentiable transform of [`crate::synthesis`] builds the same from its own FFTs.)
pub(crate) struct Coverage {
    /// [N_j ≥ τ] on the full grid.
    pub(crate) trust: Vec<Vec<bool>>,
    /// 1/√max(N_j, floor) on the first-layer grid of j.
    pub(crate) first: Vec<Vec<f64>>,
    /// 1/√max(N_j, floor) on the second-layer grid of j.
    pub(crate) second: Vec<Vec<f64>>,
}

impl Coverage {
    /// No scale yet, room for `scales`.
    pub(crate) fn with_capacity(scales: usize) -> Self {
        Self {
            trust: Vec::with_capacity(scales),
            first: Vec::with_capacity(scales),
            second: Vec::with_capacity(scales),
        }
    }

    /// Adds the next scale from its coverage N_j on the full n × n grid: the trust mask
    /// [N_j ≥ τ] and 1/√max(N_j, [`COVERAGE_FLOOR`]) subsampled to the grids of levels
    /// `first_level` (first layer) and `second_level` (second layer).
    pub(crate) fn push_scale(
        &mut self,
        cov: &[f64],
        n: usize,
        tau: f64,
        (first_level, second_level): (usize, usize),
    ) {
        self.trust.push(cov.iter().map(|&v| v >= tau).collect());
        for (target, level) in [
            (&mut self.first, first_level),
            (&mut self.second, second_level),
        ] {
            target.push(
                subsample(cov, n, n >> level)
                    .iter()
                    .map(|c| 1.0 / c.max(COVERAGE_FLOOR).sqrt())
                    .collect::<Vec<f64>>(),
            );
        }
    }
}

/// One field's first layer, index j·L + l: g_{j,l} (kept for a pair only), U_{j,l} and μ_U.
#[derive(Default)]
struct FirstLayer {
    g: Vec<Vec<Complex64>>,
    u: Vec<Vec<f64>>,
    mu: Vec<f64>,
}

/// Pooling reads the engine's labels, layout size and trust threshold through this.
impl SumLabels for ScatteringEngine {
    fn labels(&self) -> &[CoefficientLabel] {
        ScatteringEngine::labels(self)
    }

    fn cross_labels(&self) -> &[CrossLabel] {
        ScatteringEngine::cross_labels(self)
    }

    fn scale_count(&self) -> usize {
        ScatteringEngine::scale_count(self)
    }

    fn orientation_count(&self) -> usize {
        ScatteringEngine::orientation_count(self)
    }

    fn trusted_fraction(&self) -> f64 {
        self.settings.trusted_fraction
    }
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
    /// not a tile size ([`crate::limits::is_tile_size`]), J = 0 or 2^(J+1) > n, L = 0, or
    /// settings out of range.
    pub fn with_settings(
        size: usize,
        scale_count: usize,
        orientation_count: usize,
        settings: TransformSettings,
    ) -> Result<Self> {
        validate_settings(&settings)?;
        let bank = MorletBank::new(size, scale_count, orientation_count)?;
        let n = size;
        let levels = crop_levels_for(&bank, &settings, settings.first_layer_oversampling);
        let second_levels = crop_levels_for(&bank, &settings, 0);
        let mut planner = SquareFftPlanner::new();
        let top = second_levels.iter().copied().max().unwrap_or(0);
        let plans = (0..=top).map(|d| planner.plan(n >> d)).collect();
        let level_wavelets = (0..=top)
            .map(|d| {
                (0..scale_count * orientation_count)
                    .map(|i| {
                        if d == 0 || d > second_levels[i / orientation_count] {
                            Vec::new()
                        } else {
                            crop_box(
                                bank.wavelet(i / orientation_count, i % orientation_count),
                                n,
                                n >> d,
                            )
                        }
                    })
                    .collect()
            })
            .collect();
        let boxes = band_boxes(&bank, &levels, &second_levels, &settings);
        let mut coverage_kernels = Vec::with_capacity(scale_count);
        for j in 0..scale_count {
            let mut kernel = vec![0.0; n * n];
            for l in 0..orientation_count {
                for (k, v) in kernel.iter_mut().zip(bank.squared_modulus(j, l)) {
                    *k += v;
                }
            }
            let dc = kernel[0];
            kernel.iter_mut().for_each(|k| *k /= dc);
            coverage_kernels.push(kernel);
        }
        let labels =
            crate::scattering::layout::CoefficientLayout::new(scale_count, orientation_count)
                .labels();
        let cross_labels =
            crate::scattering::statistics::cross_labels(scale_count, orientation_count);
        Ok(Self {
            bank,
            settings,
            levels,
            second_levels,
            plans,
            level_wavelets,
            boxes,
            coverage_kernels,
            labels,
            cross_labels,
        })
    }

    /// True when every ψ̂_{j,l} and FT|ψ_{j,l}|² is below `tol` of its peak outside the central
    /// m × m box (Nyquist lines counted as outside).
    fn fits_in_box(bank: &MorletBank, j: usize, m: usize, tol: f64) -> bool {
        let n = bank.size();
        let half = (m / 2) as i64;
        let signed = |i: usize| signed_frequency(i, n);
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

    /// Crop level d_j of each scale: the band-pass output of scale j (order 2 at j2 = j) is
    /// computed on an (n / 2^{d_j})² grid.
    pub fn crop_levels(&self) -> &[usize] {
        &self.second_levels
    }

    /// First-layer level of each scale: |I∗ψ_{j,l}| (order 1 and the input of order 2) is
    /// computed on an (n / 2^{d})² grid, `first_layer_oversampling` levels finer than
    /// [`Self::crop_levels`] where that exists.
    pub fn first_layer_levels(&self) -> &[usize] {
        &self.levels
    }

    /// The FFT plans of the full n × n tile grid, for other statistics of the same tiles.
    pub fn tile_fft(&self) -> &SquareFft {
        &self.plans[0]
    }

    /// Labels of the coefficients, in the order of [`TileSums::sums`].
    pub fn labels(&self) -> &[CoefficientLabel] {
        &self.labels
    }

    /// In-place 2-D complex FFT of a row-major m × m array at level d, unnormalised
    /// ([`SquareFft::forward`], [`SquareFft::inverse_unnormalised`]), counted by the clock.
    fn fft2(&self, d: usize, data: &mut [Complex64], inverse: bool, clock: &mut FftClock) {
        let t = clock.start();
        let p = &self.plans[d];
        if inverse {
            p.inverse_unnormalised(data);
        } else {
            p.forward(data);
        }
        clock.stop(t, p.size(), false, inverse);
    }

    /// Full m × m DFT of a real m × m array at level d ([`SquareFft::real_spectrum`]), counted
    /// by the clock.
    fn real_spectrum(&self, d: usize, input: &[f64], clock: &mut FftClock) -> Vec<Complex64> {
        let t = clock.start();
        let out = self.plans[d].real_spectrum(input);
        clock.stop(t, self.plans[d].size(), true, false);
        out
    }

    /// Real m × m array whose DFT is the Hermitian spectrum `spec` at level d, unnormalised
    /// ([`SquareFft::real_inverse`]), counted by the clock.
    fn real_inverse(&self, d: usize, spec: &[Complex64], clock: &mut FftClock) -> Vec<f64> {
        let t = clock.start();
        let out = self.plans[d].real_inverse(spec);
        clock.stop(t, self.plans[d].size(), true, true);
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
        let c = crop_box(&spec, n, n >> d);
        let scale = 1.0 / (n * n) as f64;
        let mut out = self.real_inverse(d, &c, clock);
        out.iter_mut().for_each(|v| *v *= scale);
        out
    }

    /// ψ̂_{j,l} on the grid of level d (the bank's for d = 0).
    fn wavelet_at(&self, d: usize, j: usize, l: usize) -> &[f64] {
        if d == 0 {
            self.bank.wavelet(j, l)
        } else {
            &self.level_wavelets[d][j * self.orientation_count() + l]
        }
    }

    /// The second-layer box of (j, l) taken from a spectrum of level d_src.
    fn band(&self, d_src: usize, j: usize, l: usize) -> &BandBox {
        match &self.boxes.1[d_src][j * self.orientation_count() + l] {
            Some(b) => b,
            None => unreachable!("a box is built for every source level up to d_j"),
        }
    }

    /// The 2-D transforms one call of [`Self::transform_tile`] (`pair = false`) or
    /// [`Self::transform_tile_pair`] (`pair = true`) performs, grouped by size and kind, larger
    /// sizes first. They depend on (n, J, L) and the settings only, not on the tile's values.
    /// Per field: one real forward transform of the input at n; per scale j with crop level
    /// d_j: L complex inverse transforms at n/2^{d_j} (order 1); per j1 < J − 1: L real forward
    /// transforms at n/2^{d_{j1}} and, per j2 > j1, L² complex inverse transforms at
    /// n/2^{d'_{j2}} (order 2), with d the first-layer and d' the second-layer levels. Shared: one real forward transform of a², J complex-to-real
    /// inverses at n (coverage), and per pooling weight W_j, W_{j1,j2} on a coarse level d one
    /// real forward at n and one complex-to-real inverse at n/2^d (d_j for W_j, d'_{j2} for
    /// W_{j1,j2}). A pair adds per field and level 0 < d ≤ max d_j one complex-to-real inverse
    /// at n/2^d (the low-passed inputs), and per field and scale j ≥ 1 with d'_j ≠ d_j, L
    /// complex inverses at n/2^{d'_j} (the first layer on the second layer's grid, for X2).
    pub fn fft_census(&self, pair: bool) -> Vec<FftCount> {
        let n = self.size();
        let big_j = self.scale_count();
        let big_l = self.orientation_count();
        let fields = if pair { 2 } else { 1 };
        let size = |d: usize| n >> d;
        let mut census = Vec::new();
        add_many_to_census(&mut census, n, true, false, fields + 1);
        add_many_to_census(&mut census, n, true, true, big_j);
        let mut weight_levels: Vec<usize> = self.levels.clone();
        for j1 in 0..big_j {
            for j2 in (j1 + 1)..big_j {
                weight_levels.push(self.second_levels[j2]);
            }
        }
        for &d in weight_levels.iter().filter(|&&d| d > 0) {
            add_to_census(&mut census, n, true, false);
            add_to_census(&mut census, size(d), true, true);
        }
        for _ in 0..fields {
            for j1 in 0..big_j {
                add_many_to_census(&mut census, size(self.levels[j1]), false, true, big_l);
            }
        }
        if pair {
            let top = self.levels.iter().copied().max().unwrap_or(0);
            for _ in 0..2 {
                for d in 1..=top {
                    add_to_census(&mut census, size(d), true, true);
                }
            }
            for _ in 0..2 {
                for j in 1..big_j {
                    if self.second_levels[j] != self.levels[j] {
                        add_many_to_census(
                            &mut census,
                            size(self.second_levels[j]),
                            false,
                            true,
                            big_l,
                        );
                    }
                }
            }
        }
        for _ in 0..fields {
            for j1 in 0..big_j.saturating_sub(1) {
                add_many_to_census(&mut census, size(self.levels[j1]), true, false, big_l);
                for j2 in (j1 + 1)..big_j {
                    add_many_to_census(
                        &mut census,
                        size(self.second_levels[j2]),
                        false,
                        true,
                        big_l * big_l,
                    );
                }
            }
        }
        sort_census(&mut census);
        census
    }

    /// Transform one tile; returns weighted sums and weights for every label (see module doc).
    pub fn transform_tile(&self, tile: &TileView<'_>) -> Result<TileSums> {
        let mut clock = FftClock::new(false);
        self.run(tile, &mut clock)
    }

    /// As [`Self::transform_tile`], also timing the FFT calls (for profiling).
    pub fn transform_tile_timed(&self, tile: &TileView<'_>) -> Result<(TileSums, FftTiming)> {
        let (sums, timing, _) = profiled(|clock| self.run(tile, clock))?;
        Ok((sums, timing))
    }

    /// As [`Self::transform_tile_timed`], also returning the transforms performed grouped as in
    /// [`Self::fft_census`] (for profiling and for checking the census).
    pub fn transform_tile_census(
        &self,
        tile: &TileView<'_>,
    ) -> Result<(TileSums, FftTiming, Vec<FftCount>)> {
        profiled(|clock| self.run(tile, clock))
    }

    /// As [`Self::transform_tile_pair`], also timing the FFT calls and returning the transforms
    /// performed grouped as in [`Self::fft_census`].
    pub fn transform_tile_pair_census(
        &self,
        tile: &TilePairView<'_>,
    ) -> Result<(PairTileSums, FftTiming, Vec<FftCount>)> {
        profiled(|clock| self.run_pair(tile, clock))
    }

    /// Transform many tiles in parallel (rayon); the output keeps the input order and each
    /// tile's result does not depend on the number of threads.
    pub fn transform_tiles(&self, tiles: &[TileView<'_>]) -> Result<Vec<TileSums>> {
        tiles.par_iter().map(|t| self.transform_tile(t)).collect()
    }

    fn run(&self, tile: &TileView<'_>, clock: &mut FftClock) -> Result<TileSums> {
        let (mut autos, _) = self.run_fields(&[tile.field], tile.taper, tile.weight, clock)?;
        autos
            .pop()
            .ok_or_else(|| Error::Data("no field was transformed".into()))
    }

    /// Transform two maps on one tile sharing its taper and pooling weight (the footprint is
    /// the intersection of the two maps' footprints): the auto sums of each field, bitwise
    /// identical to [`Self::transform_tile`] of that field alone, and the cross sums in the
    /// order of [`Self::cross_labels`] (definitions in the module documentation). The FFTs of
    /// the auto path are shared: the cross set costs no FFT beyond one low-pass of each
    /// field's input per crop level.
    pub fn transform_tile_pair(&self, tile: &TilePairView<'_>) -> Result<PairTileSums> {
        let mut clock = FftClock::new(false);
        self.run_pair(tile, &mut clock)
    }

    fn run_pair(&self, tile: &TilePairView<'_>, clock: &mut FftClock) -> Result<PairTileSums> {
        let (mut autos, cross) =
            self.run_fields(&[tile.first, tile.second], tile.taper, tile.weight, clock)?;
        let second = autos.pop();
        let first = autos.pop();
        match (first, second, cross) {
            (Some(first), Some(second), Some(cross)) => Ok(PairTileSums {
                first,
                second,
                cross,
            }),
            _ => Err(Error::Data("the pair transform lost a field".into())),
        }
    }

    /// Labels of the cross coefficients, in the order of [`PairTileSums::cross`].
    pub fn cross_labels(&self) -> &[CrossLabel] {
        &self.cross_labels
    }

    /// The estimator for one field, or for two fields plus their cross sums: checks, then the
    /// terms every field shares, then per field the first layer, the cross sums of the first
    /// layer, and per field the second order (with X2 for a pair).
    fn run_fields(
        &self,
        fields: &[&[f64]],
        a: &[f64],
        w: &[f64],
        clock: &mut FftClock,
    ) -> Result<(Vec<TileSums>, Option<TileSums>)> {
        let n = self.size();
        let pair = fields.len() == 2;
        let names: &[&str] = if pair {
            &["first field", "second field"]
        } else {
            &["field"]
        };
        for (f, name) in fields.iter().zip(names) {
            check_values(name, f, n * n, n)?;
        }
        let (sw, sa) = check_taper_and_weight(a, w, n)?;
        let inputs: Vec<FieldInput> = fields
            .iter()
            .map(|f| self.field_input(f, a, w, sa, clock))
            .collect();
        let terms = self.tile_terms(a, w, clock);
        let empty = |len: usize| TileSums {
            footprint_weight: sw,
            sums: vec![0.0; len],
            weights: vec![0.0; len],
        };
        let mut autos = Vec::with_capacity(fields.len());
        let mut layers = Vec::with_capacity(fields.len());
        for input in &inputs {
            let mut sums = empty(self.labels.len());
            (sums.sums[0], sums.sums[1]) = input.order_zero;
            (sums.weights[0], sums.weights[1]) = (sw, sw);
            layers.push(self.first_layer(&input.spectrum, &terms, pair, &mut sums, clock));
            autos.push(sums);
        }
        let mut cross = pair.then(|| empty(self.cross_labels.len()));
        // With two fields, X2 needs each field's g_{j,l} on the second-layer grid of j.
        let mut second_grid_g = Vec::new();
        if let Some(cross) = cross.as_mut() {
            self.cross_first_order(&inputs, &layers, &terms, cross, clock);
            for input in &inputs {
                second_grid_g.push(self.first_layer_on_second_grids(&input.spectrum, clock));
            }
        }
        for (k, sums) in autos.iter_mut().enumerate() {
            let x2 = cross.as_mut().map(|c| (c, &second_grid_g[..]));
            self.second_order(k, &layers, &terms, sums, x2, clock);
        }
        Ok((autos, cross))
    }

    /// Order 0 of one field (Σ w f, Σ w f²) and its filter input I = a(f − μ_a), μ_a the
    /// taper-weighted mean, with the spectrum of I.
    fn field_input(
        &self,
        f: &[f64],
        a: &[f64],
        w: &[f64],
        sa: f64,
        clock: &mut FftClock,
    ) -> FieldInput {
        let mut swf = 0.0;
        let mut swf2 = 0.0;
        for i in 0..f.len() {
            swf += w[i] * f[i];
            swf2 += w[i] * f[i] * f[i];
        }
        let mu = a.iter().zip(f.iter()).map(|(a, f)| a * f).sum::<f64>() / sa;
        let input: Vec<f64> = a.iter().zip(f.iter()).map(|(a, f)| a * (f - mu)).collect();
        let spectrum = self.real_spectrum(0, &input, clock);
        FieldInput {
            order_zero: (swf, swf2),
            input,
            spectrum,
        }
    }

    /// The terms every field of the tile shares: coverage, pooling weights and tapers.
    fn tile_terms(&self, a: &[f64], w: &[f64], clock: &mut FftClock) -> TileTerms {
        let n = self.size();
        let Coverage {
            trust,
            first: coverage_first,
            second: coverage_second,
        } = self.coverage(a, clock);
        let mut first_weights = Vec::with_capacity(trust.len());
        let mut first_trusted = Vec::with_capacity(trust.len());
        for (tj, &level) in trust.iter().zip(&self.levels) {
            let wj: Vec<f64> = w
                .iter()
                .zip(tj)
                .map(|(&w, &t)| if t { w } else { 0.0 })
                .collect();
            first_trusted.push(wj.iter().sum::<f64>());
            first_weights.push(self.low_pass(&wj, level, clock));
        }
        let pair_weights = pair_trusted_weights(w, &trust, |wp, j2| {
            self.low_pass(wp, self.second_levels[j2], clock)
        });
        let top = self.levels.iter().copied().max().unwrap_or(0);
        let tapers: Vec<Vec<f64>> = (0..=top).map(|d| subsample(a, n, n >> d)).collect();
        TileTerms {
            coverage_first,
            coverage_second,
            first_weights,
            first_trusted,
            pair_weights,
            tapers,
        }
    }

    /// Coverage N_j = a² ∗ K_j at full resolution: per scale the trust mask N_j ≥ τ and
    /// 1/√max(N_j, floor) subsampled to the first-layer and second-layer grids of j.
    fn coverage(&self, a: &[f64], clock: &mut FftClock) -> Coverage {
        let n = self.size();
        let nn = n * n;
        let big_j = self.scale_count();
        let a2: Vec<f64> = a.iter().map(|a| a * a).collect();
        let a2_spec = self.real_spectrum(0, &a2, clock);
        let tau = self.settings.coverage_threshold;
        let mut coverage = Coverage::with_capacity(big_j);
        for j in 0..big_j {
            let c: Vec<Complex64> = a2_spec
                .iter()
                .zip(&self.coverage_kernels[j])
                .map(|(s, k)| s * k)
                .collect();
            let cov: Vec<f64> = self
                .real_inverse(0, &c, clock)
                .iter()
                .map(|v| v / nn as f64)
                .collect();
            coverage.push_scale(&cov, n, tau, (self.levels[j], self.second_levels[j]));
        }
        coverage
    }

    /// First layer of one field: per (j, l) g = IDFT(ψ̂_{j,l} · spectrum) on the first-layer
    /// grid, U = |g|/N · N_j^{−1/2}, its pooled S1 and P sums (written to `out` with their
    /// weights) and its taper-weighted mean μ_U; g is kept only when `keep_g`.
    fn first_layer(
        &self,
        spectrum: &[Complex64],
        terms: &TileTerms,
        keep_g: bool,
        out: &mut TileSums,
        clock: &mut FftClock,
    ) -> FirstLayer {
        let n = self.size();
        let big_l = self.orientation_count();
        let layout = crate::scattering::layout::CoefficientLayout::new(self.scale_count(), big_l);
        let (s1_base, p_base) = (layout.first_order(0, 0), layout.band_power_start());
        let scale = 1.0 / (n * n) as f64;
        let mut layer = FirstLayer::default();
        for j1 in 0..self.scale_count() {
            let d1 = self.levels[j1];
            let m1 = n >> d1;
            let factor1 = (1usize << (2 * d1)) as f64;
            for l1 in 0..big_l {
                let mut g: Vec<Complex64> = Vec::with_capacity(m1 * m1);
                self.boxes.0[j1 * big_l + l1].gather(spectrum, self.wavelet_at(0, j1, l1), &mut g);
                self.fft2(d1, &mut g, true, clock);
                let u: Vec<f64> = g
                    .iter()
                    .zip(&terms.coverage_first[j1])
                    .map(|(z, &c)| z.norm_sqr().sqrt() * scale * c)
                    .collect();
                let mut s1 = 0.0;
                let mut p = 0.0;
                for (wv, uv) in terms.first_weights[j1].iter().zip(&u) {
                    s1 += wv * uv;
                    p += wv * uv * uv;
                }
                let idx = layout.pair_offset(j1, l1);
                out.sums[s1_base + idx] = s1 * factor1;
                out.weights[s1_base + idx] = terms.first_trusted[j1];
                out.sums[p_base + idx] = p * factor1;
                out.weights[p_base + idx] = terms.first_trusted[j1];
                let ad = &terms.tapers[d1];
                let sad: f64 = ad.iter().sum();
                let mu_u = if sad > 0.0 {
                    ad.iter().zip(&u).map(|(a, u)| a * u).sum::<f64>() / sad
                } else {
                    0.0
                };
                layer.mu.push(mu_u);
                layer.u.push(u);
                if keep_g {
                    layer.g.push(g);
                }
            }
        }
        layer
    }

    /// The input I of one field low-passed to each level up to the coarsest first-layer level
    /// (the band of the envelope U); I itself at level 0.
    fn low_passed_input(&self, input: &FieldInput, clock: &mut FftClock) -> Vec<Vec<f64>> {
        let n = self.size();
        let scale = 1.0 / (n * n) as f64;
        let top = self.levels.iter().copied().max().unwrap_or(0);
        (0..=top)
            .map(|d| {
                if d == 0 {
                    return input.input.clone();
                }
                let c = crop_box(&input.spectrum, n, n >> d);
                let mut out = self.real_inverse(d, &c, clock);
                out.iter_mut().for_each(|v| *v *= scale);
                out
            })
            .collect()
    }

    /// Cross sums of the first layer of a pair: P_AB and X1 in both directions (module
    /// documentation), written to `cross` with their weights.
    fn cross_first_order(
        &self,
        inputs: &[FieldInput],
        layers: &[FirstLayer],
        terms: &TileTerms,
        cross: &mut TileSums,
        clock: &mut FftClock,
    ) {
        let n = self.size();
        let big_l = self.orientation_count();
        let first_count = self.scale_count() * big_l;
        let scale = 1.0 / (n * n) as f64;
        let lowpassed: Vec<Vec<Vec<f64>>> = inputs
            .iter()
            .map(|input| self.low_passed_input(input, clock))
            .collect();
        for j in 0..self.scale_count() {
            let d = self.levels[j];
            let factor = (1usize << (2 * d)) as f64;
            let wl = &terms.first_weights[j];
            let c = &terms.coverage_first[j];
            for l in 0..big_l {
                let idx = j * big_l + l;
                let (ga, gb) = (&layers[0].g[idx], &layers[1].g[idx]);
                let mut p = 0.0;
                for (((wv, za), zb), cv) in wl.iter().zip(ga).zip(gb).zip(c) {
                    p += wv * (za.re * zb.re + za.im * zb.im) * scale * scale * cv * cv;
                }
                cross.sums[idx] = p * factor;
                cross.weights[idx] = terms.first_trusted[j];
                // X1: block 1 is A against B's modulus, block 2 B against A's modulus.
                for (block, (field, envelope)) in [(0usize, 1usize), (1, 0)].iter().enumerate() {
                    let i_field = &lowpassed[*field][d];
                    let u = &layers[*envelope].u[idx];
                    let mu = layers[*envelope].mu[idx];
                    let mut x = 0.0;
                    for ((wv, iv), uv) in wl.iter().zip(i_field).zip(u) {
                        x += wv * iv * (uv - mu);
                    }
                    let at = (block + 1) * first_count + idx;
                    cross.sums[at] = x * factor;
                    cross.weights[at] = terms.first_trusted[j];
                }
            }
        }
    }

    /// g_{j,l} of one field on the second-layer grid of j, where that grid differs from the
    /// first-layer one (else `None`: the first-layer g serves), for X2.
    fn first_layer_on_second_grids(
        &self,
        spectrum: &[Complex64],
        clock: &mut FftClock,
    ) -> SecondGridLayer {
        let n = self.size();
        let mut out = Vec::new();
        for j in 0..self.scale_count() {
            for l in 0..self.orientation_count() {
                let d = self.second_levels[j];
                out.push((j > 0 && d != self.levels[j]).then(|| {
                    let mut g = Vec::with_capacity((n >> d) * (n >> d));
                    self.band(0, j, l)
                        .gather(spectrum, self.wavelet_at(0, j, l), &mut g);
                    self.fft2(d, &mut g, true, clock);
                    g
                }));
            }
        }
        out
    }

    /// Second order of field k: S2 sums (with their weights) into `out`; with `x2` (the cross
    /// sums and every field's g on the second-layer grids) also X2 with this field's envelope.
    fn second_order(
        &self,
        k: usize,
        layers: &[FirstLayer],
        terms: &TileTerms,
        out: &mut TileSums,
        mut x2: Option<(&mut TileSums, &[SecondGridLayer])>,
        clock: &mut FftClock,
    ) {
        let n = self.size();
        let big_j = self.scale_count();
        let big_l = self.orientation_count();
        let layout = crate::scattering::layout::CoefficientLayout::new(big_j, big_l);
        let first_count = layout.first_order_count();
        let second_count = layout.second_order_count();
        let scale = 1.0 / (n * n) as f64;
        let mut g2: Vec<Complex64> = Vec::with_capacity(n * n);
        let mut s2_index = layout.second_order_start();
        // X2 with this field's envelope: block 0 (A ← B) when k is B, block 1 when k is A.
        let x2_block = if k == 1 { 0 } else { 1 };
        let mut x2_index = 3 * first_count + x2_block * second_count;
        for (j1, pair_weights_j1) in terms.pair_weights.iter().enumerate() {
            if j1 + 1 >= big_j {
                continue;
            }
            let d1 = self.levels[j1];
            let m1 = n >> d1;
            for l1 in 0..big_l {
                let idx1 = j1 * big_l + l1;
                let u = &layers[k].u[idx1];
                let mu_u = layers[k].mu[idx1];
                let ad = &terms.tapers[d1];
                let second_input: Vec<f64> =
                    ad.iter().zip(u).map(|(a, u)| a * (u - mu_u)).collect();
                let spec2 = self.real_spectrum(d1, &second_input, clock);
                for (pair_index, j2) in ((j1 + 1)..big_j).enumerate() {
                    let d2 = self.second_levels[j2];
                    let factor2 = (1usize << (2 * d2)) as f64;
                    debug_assert!(n >> d2 <= m1);
                    let inv_sqrt_cov2 = &terms.coverage_second[j2];
                    let (wp, wtotal) = &pair_weights_j1[pair_index];
                    let scale2 = 1.0 / (m1 * m1) as f64;
                    for l2 in 0..big_l {
                        self.band(d1, j2, l2)
                            .gather(&spec2, self.wavelet_at(d1, j2, l2), &mut g2);
                        self.fft2(d2, &mut g2, true, clock);
                        let mut s2 = 0.0;
                        for ((z, &c), wv) in g2.iter().zip(inv_sqrt_cov2).zip(wp) {
                            s2 += wv * z.norm_sqr().sqrt() * c;
                        }
                        out.sums[s2_index] = s2 * factor2 * scale2;
                        out.weights[s2_index] = *wtotal;
                        s2_index += 1;
                        if let Some((cross, second_grid_g)) = x2.as_mut() {
                            // the other field filtered at (j2, l2), on the same grid
                            let at = j2 * big_l + l2;
                            let other = match &second_grid_g[1 - k][at] {
                                Some(g) => g,
                                None => &layers[1 - k].g[at],
                            };
                            let mut x = 0.0;
                            for (((z, o), &c), wv) in
                                g2.iter().zip(other).zip(inv_sqrt_cov2).zip(wp)
                            {
                                x += wv * (o.re * z.re + o.im * z.im) * c * c;
                            }
                            cross.sums[x2_index] = x * factor2 * scale2 * scale;
                            cross.weights[x2_index] = *wtotal;
                            x2_index += 1;
                        }
                    }
                }
            }
        }
    }
}
