//! The Morlet filter bank of the scattering transform, built analytically in Fourier space on an
//! n × n periodic pixel grid.
//!
//! # Formula
//!
//! Morlet family of Bruna & Mallat 2013 (IEEE TPAMI 35, 1872, section on the 2D Morlet wavelet).
//! For scale `j` (0 ≤ j < J) and orientation `l` (0 ≤ l < L), with θ_l = π l / L, the unit vector
//! e = (cos θ_l, sin θ_l) (x along array columns, y along array rows), and for a displacement
//! u = (x, y) in pixels the components u∥ = u·e and u⊥ = u·e⊥:
//!
//! * envelope width σ_j = 0.8 · 2^j pixels, central frequency ξ_j = 3π / (4 · 2^j) rad/pixel,
//!   slant s = 4 / L (s < 1 stretches the envelope along the wave fronts);
//! * Gaussian envelope with **unit L1 norm**:
//!   g(u) = s / (2π σ²) · exp(−(u∥² + s² u⊥²) / (2σ²)), so that ∫ g = 1 and ĝ(0) = 1;
//! * wavelet ψ(u) = g(u) · (exp(i ξ e·u) − β), with β chosen so that the *sampled* wavelet sums
//!   to zero on the grid (ψ̂(0) = 0 exactly, see below).
//!
//! The continuous Fourier transform (convention f̂(k) = ∫ f(u) e^{−i k·u} du) is
//! ĝ(k) = exp(−σ² (k∥² + k⊥² / s²) / 2) and ψ̂(k) = ĝ(k − ξ e) − β ĝ(k).
//!
//! # Discretisation
//!
//! The filters are built **analytically in Fourier space and periodised**: the grid filter is the
//! continuous filter sampled at integer pixel positions and wrapped onto the n × n torus, whose
//! DFT is, by the Poisson summation formula, the continuous transform summed over the Fourier
//! copies, ψ̂_grid(k) = Σ_m ψ̂(k + 2π m), m ∈ ℤ². The copies within reach of the Gaussian tail
//! (down to exp(−40)) are summed. The zero-mean constant is accordingly
//! β = Σ_m ĝ(2πm − ξe) / Σ_m ĝ(2πm), which makes ψ̂_grid(0) = 0 to rounding. Because g is even,
//! ψ̂ is real. Fourier arrays are stored row-major, index [iy·n + ix], with frequency index
//! q = i for i < n/2 and q = i − n otherwise, and k = 2π q / n rad/pixel.
//!
//! The low-pass filter φ_J is the isotropic unit-L1 Gaussian of width σ_J = 0.8 · 2^J,
//! φ̂(k) = exp(−σ_J² |k|² / 2), periodised the same way.
//!
//! The bank also holds the Fourier transform of the squared modulus |ψ|² (needed by the
//! mask-aware normaliser). Since |ψ(u)|² = g(u)² (1 + β² − 2β cos(ξ e·u)) and g² is
//! s/(4πσ²) times a unit-L1 Gaussian of width σ/√2,
//! FT(|ψ|²)(k) = s/(4πσ²) · ((1 + β²) E(k) − β (E(k − ξe) + E(k + ξe))) with
//! E(k) = exp(−σ² (k∥² + k⊥²/s²) / 4), periodised likewise.

use crate::limits::is_tile_size;
use crate::{Error, Result};
use std::f64::consts::PI;

/// Envelope width of scale j in pixels: σ_j = 0.8 · 2^j (Bruna & Mallat 2013 Morlet family).
pub fn envelope_width(j: usize) -> f64 {
    0.8 * (1u64 << j) as f64
}

/// Central frequency of scale j in rad/pixel: ξ_j = 3π / (4 · 2^j).
pub fn central_frequency(j: usize) -> f64 {
    3.0 * PI / (4.0 * (1u64 << j) as f64)
}

/// Orientation angle of index l among L: θ_l = π l / L.
pub fn orientation_angle(l: usize, l_count: usize) -> f64 {
    PI * l as f64 / l_count as f64
}

/// Minimum and maximum of the Littlewood–Paley sum over the wavelets' band.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LittlewoodPaleyRange {
    /// Smallest value of Σ_{j,l} (|ψ̂_{j,l}(k)|² + |ψ̂_{j,l}(−k)|²)/2 for ξ_{J−1} ≤ |k| ≤ ξ_0.
    pub min: f64,
    /// Largest value of the same sum over the same band.
    pub max: f64,
    /// Inner edge of the band, ξ_{J−1} in rad/pixel.
    pub band_low: f64,
    /// Outer edge of the band, ξ_0 in rad/pixel.
    pub band_high: f64,
}

/// Morlet wavelets ψ_{j,l} and the Gaussian low-pass φ_J in Fourier space on an n × n grid.
#[derive(Debug, Clone)]
pub struct MorletBank {
    size: usize,
    scale_count: usize,
    orientation_count: usize,
    slant: f64,
    wavelets: Vec<Vec<f64>>,
    squared_moduli: Vec<Vec<f64>>,
    low_pass: Vec<f64>,
}

/// Signed frequency index of array index i on an n-point grid, as a float
/// ([`crate::scattering::fft::signed_frequency`]).
fn signed_index(i: usize, n: usize) -> f64 {
    crate::scattering::fft::signed_frequency(i, n) as f64
}

/// Number of 2π Fourier copies on each side needed so that a Gaussian centred within
/// `centre_radius` of the origin with largest width `width` (rad/pixel) has decayed to exp(−40).
fn copies_needed(centre_radius: f64, width: f64) -> i32 {
    let reach = PI + centre_radius + (80.0f64).sqrt() * width;
    (reach / (2.0 * PI)).ceil() as i32
}

/// The largest level d such that the grid n/2^d is whole, even (or a power of two) and at
/// least `min_grid` pixels wide (0 when none is).
pub(crate) fn coarsest_level(n: usize, min_grid: usize) -> usize {
    let mut d = 0;
    while n.is_multiple_of(1usize << (d + 1)) {
        let m = n >> (d + 1);
        if m < min_grid || !(m.is_multiple_of(2) || m.is_power_of_two()) {
            break;
        }
        d += 1;
    }
    d
}

impl MorletBank {
    /// Build the bank for an n × n grid, `scale_count` = J scales and `orientation_count` = L
    /// orientations. Requires n a tile size ([`is_tile_size`]), 1 ≤ J ≤
    /// [`crate::limits::MAX_SCALES`] with 2^(J+1) ≤ n, and L ≥ 1.
    pub fn new(size: usize, scale_count: usize, orientation_count: usize) -> Result<Self> {
        if !is_tile_size(size) {
            return Err(Error::Setting(format!(
                "tile size must be 2^k·m pixels (m = 1, 3, 5, 7 or 9; at least 8, and 16·m when m > 1), got {size}"
            )));
        }
        if scale_count == 0 {
            return Err(Error::Setting(
                "number of scales J must be at least 1, got 0".into(),
            ));
        }
        if scale_count > crate::limits::MAX_SCALES {
            return Err(Error::Setting(format!(
                "J = {scale_count} scales is too many: at most {}",
                crate::limits::MAX_SCALES
            )));
        }
        if (1usize << (scale_count + 1)) > size {
            let max_j = size.ilog2() as usize - 1;
            return Err(Error::Setting(format!(
                "J = {scale_count} scales is too large for a {size}-pixel tile: need 2^(J+1) <= {size}, i.e. J <= {max_j}"
            )));
        }
        if orientation_count == 0 {
            return Err(Error::Setting(
                "number of orientations L must be at least 1, got 0".into(),
            ));
        }
        crate::limits::check_orientations(orientation_count, size)?;
        let slant = 4.0 / orientation_count as f64;
        let mut wavelets = Vec::with_capacity(scale_count * orientation_count);
        let mut squared_moduli = Vec::with_capacity(scale_count * orientation_count);
        for j in 0..scale_count {
            for l in 0..orientation_count {
                let (w, sq) = Self::build_wavelet(size, j, l, orientation_count, slant);
                wavelets.push(w);
                squared_moduli.push(sq);
            }
        }
        let low_pass = Self::build_low_pass(size, scale_count);
        Ok(Self {
            size,
            scale_count,
            orientation_count,
            slant,
            wavelets,
            squared_moduli,
            low_pass,
        })
    }

    /// Periodised ψ̂ and FT[|ψ|²] of one wavelet (formulas in the module documentation).
    fn build_wavelet(
        n: usize,
        j: usize,
        l: usize,
        l_count: usize,
        slant: f64,
    ) -> (Vec<f64>, Vec<f64>) {
        let sigma = envelope_width(j);
        let xi = central_frequency(j);
        let theta = orientation_angle(l, l_count);
        let (st, ct) = theta.sin_cos();
        // ĝ(k) with k given in Cartesian rad/pixel components.
        let envelope = |kx: f64, ky: f64, quarter: bool| {
            let kpar = kx * ct + ky * st;
            let kperp = -kx * st + ky * ct;
            let q = sigma * sigma * (kpar * kpar + kperp * kperp / (slant * slant));
            if quarter {
                (-q / 4.0).exp()
            } else {
                (-q / 2.0).exp()
            }
        };
        let width = slant.max(1.0) / sigma;
        let m_max = copies_needed(xi, width * std::f64::consts::SQRT_2);
        let (cx, cy) = (xi * ct, xi * st);
        // Copies farther than this from the origin contribute less than exp(−40) to every term.
        let skip_radius = xi + (80.0f64).sqrt() * width * std::f64::consts::SQRT_2;
        // β = Σ_m ĝ(2πm − ξe) / Σ_m ĝ(2πm)
        let mut num = 0.0;
        let mut den = 0.0;
        for my in -m_max..=m_max {
            for mx in -m_max..=m_max {
                let (px, py) = (2.0 * PI * mx as f64, 2.0 * PI * my as f64);
                num += envelope(px - cx, py - cy, false);
                den += envelope(px, py, false);
            }
        }
        let beta = num / den;
        let norm_sq = slant / (4.0 * PI * sigma * sigma);
        let mut psi = vec![0.0; n * n];
        let mut sq = vec![0.0; n * n];
        let step = 2.0 * PI / n as f64;
        for iy in 0..n {
            let ky0 = step * signed_index(iy, n);
            for ix in 0..n {
                let kx0 = step * signed_index(ix, n);
                let mut acc = 0.0;
                let mut acc_sq = 0.0;
                for my in -m_max..=m_max {
                    let ky = ky0 + 2.0 * PI * my as f64;
                    for mx in -m_max..=m_max {
                        let kx = kx0 + 2.0 * PI * mx as f64;
                        if kx.hypot(ky) > skip_radius {
                            continue;
                        }
                        let base = envelope(kx, ky, false);
                        acc += envelope(kx - cx, ky - cy, false) - beta * base;
                        acc_sq += (1.0 + beta * beta) * envelope(kx, ky, true)
                            - beta
                                * (envelope(kx - cx, ky - cy, true)
                                    + envelope(kx + cx, ky + cy, true));
                    }
                }
                psi[iy * n + ix] = acc;
                sq[iy * n + ix] = norm_sq * acc_sq;
            }
        }
        (psi, sq)
    }

    /// Periodised isotropic Gaussian low-pass φ̂_J(k) = exp(−σ_J² |k|² / 2).
    fn build_low_pass(n: usize, scale_count: usize) -> Vec<f64> {
        let sigma = envelope_width(scale_count);
        let m_max = copies_needed(0.0, 1.0 / sigma);
        let step = 2.0 * PI / n as f64;
        let mut out = vec![0.0; n * n];
        for iy in 0..n {
            let ky0 = step * signed_index(iy, n);
            for ix in 0..n {
                let kx0 = step * signed_index(ix, n);
                let mut acc = 0.0;
                for my in -m_max..=m_max {
                    for mx in -m_max..=m_max {
                        let kx = kx0 + 2.0 * PI * mx as f64;
                        let ky = ky0 + 2.0 * PI * my as f64;
                        acc += (-sigma * sigma * (kx * kx + ky * ky) / 2.0).exp();
                    }
                }
                out[iy * n + ix] = acc;
            }
        }
        out
    }

    /// Grid size n.
    pub fn size(&self) -> usize {
        self.size
    }

    /// Number of scales J.
    pub fn scale_count(&self) -> usize {
        self.scale_count
    }

    /// Number of orientations L.
    pub fn orientation_count(&self) -> usize {
        self.orientation_count
    }

    /// Adds grid size, scale count and orientation count to the `Debug` text of an engine that
    /// owns the bank (which shows these, not the filters).
    pub(crate) fn debug_shape(&self, d: &mut std::fmt::DebugStruct<'_, '_>) {
        d.field("size", &self.size)
            .field("scales", &self.scale_count)
            .field("orientations", &self.orientation_count);
    }

    /// Slant s = 4 / L of the envelope.
    pub fn slant(&self) -> f64 {
        self.slant
    }

    /// ψ̂_{j,l} on the n × n Fourier grid (real), row-major [iy·n + ix].
    pub fn wavelet(&self, j: usize, l: usize) -> &[f64] {
        &self.wavelets[j * self.orientation_count + l]
    }

    /// Fourier transform of |ψ_{j,l}|² on the n × n Fourier grid (real).
    pub fn squared_modulus(&self, j: usize, l: usize) -> &[f64] {
        &self.squared_moduli[j * self.orientation_count + l]
    }

    /// φ̂_J on the n × n Fourier grid.
    pub fn low_pass(&self) -> &[f64] {
        &self.low_pass
    }

    /// Littlewood–Paley sum A(k) = Σ_{j,l} (|ψ̂_{j,l}(k)|² + |ψ̂_{j,l}(−k)|²)/2 on the grid.
    pub fn littlewood_paley_sum(&self) -> Vec<f64> {
        let n = self.size;
        let mut out = vec![0.0; n * n];
        for psi in &self.wavelets {
            for iy in 0..n {
                let ny = (n - iy) % n;
                for ix in 0..n {
                    let nx = (n - ix) % n;
                    let a = psi[iy * n + ix];
                    let b = psi[ny * n + nx];
                    out[iy * n + ix] += 0.5 * (a * a + b * b);
                }
            }
        }
        out
    }

    /// Minimum and maximum of the Littlewood–Paley sum over the band ξ_{J−1} ≤ |k| ≤ ξ_0.
    pub fn littlewood_paley_range(&self) -> LittlewoodPaleyRange {
        let n = self.size;
        let sum = self.littlewood_paley_sum();
        let band_low = central_frequency(self.scale_count - 1);
        let band_high = central_frequency(0);
        let step = 2.0 * PI / n as f64;
        let mut min = f64::INFINITY;
        let mut max = f64::NEG_INFINITY;
        for iy in 0..n {
            for ix in 0..n {
                let k = step * signed_index(ix, n).hypot(signed_index(iy, n));
                if k >= band_low && k <= band_high {
                    min = min.min(sum[iy * n + ix]);
                    max = max.max(sum[iy * n + ix]);
                }
            }
        }
        LittlewoodPaleyRange {
            min,
            max,
            band_low,
            band_high,
        }
    }
}
