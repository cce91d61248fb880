//! The 2-D discrete Fourier transforms of square grids, and the folding of a DFT index to its
//! signed frequency and wavenumber: the one home of both for the engine, the tile spectra, flat
//! maps and synthesis.
//!
//! # Conventions
//!
//! An m × m grid is a row-major array, value x(r) of the pixel r = (x, y) at index `y·m + x`; its
//! spectrum X(k), k = (k_x, k_y), uses the same layout (index `k_y·m + k_x`), with the DFT index k ∈ {0, …, m − 1} standing for the signed
//! frequency [`signed_frequency`]. The transforms are
//!
//! - forward (unnormalised): X(k) = Σ_r x(r) e^{−2πi k·r/m},
//! - inverse, unnormalised: x(r) = Σ_k X(k) e^{+2πi k·r/m},
//! - inverse ([`SquareFft::inverse`]): the unnormalised inverse times 1/m², so that it undoes
//!   the forward transform,
//!
//! with k·r = k_x x + k_y y (the DFT in two dimensions; Cooley & Tukey 1965, Math. Comp. 19,
//! 297, for the fast algorithm, here from `rustfft` and `realfft`). Every transform runs the
//! 1-D transforms along the rows first, then along the columns, and scales (where it does)
//! after both passes; this order is part of the contract, because callers rely on results that
//! are bitwise reproducible.
//!
//! # Plans
//!
//! [`SquareFftPlanner`] builds and caches the plans of each grid size (complex forward and
//! inverse, real-to-complex and complex-to-real); a [`SquareFft`] holds the plans of one size.
//! Both are plain values owned by the object that transforms (the engine, the tile-spectrum
//! estimator, the differentiable transform): there is no global state. A [`SquareFft`] is
//! `Send + Sync` and every call allocates its own scratch, so one value is shared by reference
//! across threads and results do not depend on scheduling.

use num_complex::Complex64;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use rustfft::{Fft, FftPlanner};
use std::collections::BTreeMap;
use std::sync::Arc;

/// Signed frequency q of the DFT index i on an m-point grid: q = i for i < m/2, q = i − m
/// otherwise (so the Nyquist index m/2 of an even grid folds to −m/2; common practice, the
/// order of numpy's `fft.fftfreq` times m).
///
/// # Examples
///
/// Values from `numpy.fft.fftfreq(8) * 8` = `[0, 1, 2, 3, -4, -3, -2, -1]` (numpy 2):
///
/// ```
/// use planisphere::scattering::fft::signed_frequency;
/// let q: Vec<i64> = (0..8).map(|i| signed_frequency(i, 8)).collect();
/// assert_eq!(q, [0, 1, 2, 3, -4, -3, -2, -1]);
/// ```
pub fn signed_frequency(i: usize, m: usize) -> i64 {
    if i < m / 2 {
        i as i64
    } else {
        i as i64 - m as i64
    }
}

/// Wavenumber |k| (rad⁻¹) of the DFT cell (ix, iy) of an m × m grid of pixel side Δ radians:
/// |k| = Δk · √(q_x² + q_y²), with Δk = 2π/(mΔ) and q the [`signed_frequency`] of each index
/// (common practice for the flat-sky wavenumber of a periodic grid). The fundamental (|q| = 1)
/// is exactly Δk, the first edge of [`crate::measure::WavenumberBins::logarithmic`].
pub fn wavenumber(ix: usize, iy: usize, m: usize, pixel_size: f64) -> f64 {
    let dk = 2.0 * std::f64::consts::PI / (m as f64 * pixel_size);
    let qx = signed_frequency(ix, m) as f64;
    let qy = signed_frequency(iy, m) as f64;
    dk * (qx.powi(2) + qy.powi(2)).sqrt()
}

/// The plans of one grid size m: complex forward and inverse, real-to-complex and
/// complex-to-real (conventions in the module documentation). Cloning shares the plans.
#[derive(Clone)]
pub struct SquareFft {
    size: usize,
    forward: Arc<dyn Fft<f64>>,
    inverse: Arc<dyn Fft<f64>>,
    real_forward: Arc<dyn RealToComplex<f64>>,
    real_inverse: Arc<dyn ComplexToReal<f64>>,
}

impl std::fmt::Debug for SquareFft {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "SquareFft({0} x {0})", self.size)
    }
}

/// Transpose a row-major m × m array in place.
fn transpose_square(data: &mut [Complex64], m: usize) {
    for r in 0..m {
        for c in (r + 1)..m {
            data.swap(r * m + c, c * m + r);
        }
    }
}

impl SquareFft {
    /// Plans for m × m grids from a planner of their own (use a [`SquareFftPlanner`] to share
    /// plans between sizes and objects).
    pub fn new(size: usize) -> Self {
        SquareFftPlanner::new().plan(size)
    }

    /// Grid side m.
    pub fn size(&self) -> usize {
        self.size
    }

    /// Forward DFT in place, unnormalised: X(k) = Σ_r x(r) e^{−2πi k·r/m}.
    pub fn forward(&self, data: &mut [Complex64]) {
        self.rows_then_columns(data, &self.forward);
    }

    /// Inverse DFT in place, unnormalised: x(r) = Σ_k X(k) e^{+2πi k·r/m}.
    pub fn inverse_unnormalised(&self, data: &mut [Complex64]) {
        self.rows_then_columns(data, &self.inverse);
    }

    /// Inverse DFT in place, normalised: the unnormalised inverse, then every value times 1/m².
    pub fn inverse(&self, data: &mut [Complex64]) {
        self.inverse_unnormalised(data);
        let s = 1.0 / (self.size * self.size) as f64;
        data.iter_mut().for_each(|z| *z *= s);
    }

    /// The 1-D transform along every row, then (by transposing, transforming the rows and
    /// transposing back) along every column.
    fn rows_then_columns(&self, data: &mut [Complex64], fft: &Arc<dyn Fft<f64>>) {
        let mut scratch = vec![Complex64::default(); fft.get_inplace_scratch_len()];
        fft.process_with_scratch(data, &mut scratch);
        transpose_square(data, self.size);
        fft.process_with_scratch(data, &mut scratch);
        transpose_square(data, self.size);
    }

    /// Forward DFT of a real array by the complex transform of x + 0i ([`Self::forward`]).
    /// Equal to [`Self::real_spectrum`] to rounding, not bitwise.
    pub fn spectrum_of(&self, real: &[f64]) -> Vec<Complex64> {
        let mut d: Vec<Complex64> = real.iter().map(|&v| Complex64::new(v, 0.0)).collect();
        self.forward(&mut d);
        d
    }

    /// Forward DFT (unnormalised) of a real m × m array, full m × m spectrum: real-to-complex
    /// transforms of the rows (the m/2 + 1 non-negative x-frequencies), complex transforms of
    /// those columns, and the other columns by Hermitian symmetry X(−k) = conj X(k).
    pub fn real_spectrum(&self, input: &[f64]) -> Vec<Complex64> {
        let m = self.size;
        let h = m / 2 + 1;
        let mut row = vec![0.0; m];
        let mut row_out = self.real_forward.make_output_vec();
        let mut scratch = self.real_forward.make_scratch_vec();
        let mut half = vec![Complex64::default(); h * m]; // column-major: [kx·m + iy]
        for iy in 0..m {
            row.copy_from_slice(&input[iy * m..(iy + 1) * m]);
            // Lengths are fixed by the plan, so the transform cannot fail.
            if self
                .real_forward
                .process_with_scratch(&mut row, &mut row_out, &mut scratch)
                .is_err()
            {
                unreachable!("real FFT buffers have the planned lengths");
            }
            for (kx, v) in row_out.iter().enumerate() {
                half[kx * m + iy] = *v;
            }
        }
        let mut cscratch = vec![Complex64::default(); self.forward.get_inplace_scratch_len()];
        self.forward.process_with_scratch(&mut half, &mut cscratch);
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
        out
    }

    /// Real m × m array whose DFT is the Hermitian m × m spectrum `spec` (unnormalised inverse,
    /// x(r) = Σ_k spec(k) e^{+2πi k·r/m}): complex inverse transforms of the m/2 + 1
    /// non-negative x-frequency columns, then complex-to-real transforms of the rows (the
    /// imaginary parts of the self-conjugate bins, zero for an exactly Hermitian input, are
    /// dropped).
    pub fn real_inverse(&self, spec: &[Complex64]) -> Vec<f64> {
        let m = self.size;
        let h = m / 2 + 1;
        let mut half = vec![Complex64::default(); h * m]; // column-major: [kx·m + ky]
        for ky in 0..m {
            for kx in 0..h {
                half[kx * m + ky] = spec[ky * m + kx];
            }
        }
        let mut cscratch = vec![Complex64::default(); self.inverse.get_inplace_scratch_len()];
        self.inverse.process_with_scratch(&mut half, &mut cscratch);
        let mut row_in = self.real_inverse.make_input_vec();
        let mut scratch = self.real_inverse.make_scratch_vec();
        let mut out = vec![0.0; m * m];
        for (iy, row) in out.chunks_mut(m).enumerate() {
            for (kx, v) in row_in.iter_mut().enumerate() {
                *v = half[kx * m + iy];
            }
            row_in[0].im = 0.0;
            row_in[h - 1].im = 0.0;
            // Lengths are fixed by the plan and the self-conjugate bins are real.
            if self
                .real_inverse
                .process_with_scratch(&mut row_in, row, &mut scratch)
                .is_err()
            {
                unreachable!("real inverse FFT buffers have the planned lengths");
            }
        }
        out
    }
}

/// Builds [`SquareFft`] plans and keeps one per grid size, so every object built from the same
/// planner shares the plans of a size (and the sub-plans `rustfft` shares between sizes).
pub struct SquareFftPlanner {
    complex: FftPlanner<f64>,
    real: RealFftPlanner<f64>,
    cache: BTreeMap<usize, SquareFft>,
}

impl std::fmt::Debug for SquareFftPlanner {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let sizes: Vec<usize> = self.cache.keys().copied().collect();
        write!(f, "SquareFftPlanner(sizes {sizes:?})")
    }
}

impl Default for SquareFftPlanner {
    fn default() -> Self {
        Self::new()
    }
}

impl SquareFftPlanner {
    /// A planner with no plans yet.
    pub fn new() -> Self {
        Self {
            complex: FftPlanner::new(),
            real: RealFftPlanner::new(),
            cache: BTreeMap::new(),
        }
    }

    /// The plans of m × m grids, built on first use.
    pub fn plan(&mut self, size: usize) -> SquareFft {
        if let Some(p) = self.cache.get(&size) {
            return p.clone();
        }
        let plans = SquareFft {
            size,
            forward: self.complex.plan_fft_forward(size),
            inverse: self.complex.plan_fft_inverse(size),
            real_forward: self.real.plan_fft_forward(size),
            real_inverse: self.real.plan_fft_inverse(size),
        };
        self.cache.insert(size, plans.clone());
        plans
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Direct O(m⁴) DFT with the sign `sign` in the exponent (definition of the module doc).
    fn direct(x: &[Complex64], m: usize, sign: f64) -> Vec<Complex64> {
        let mut out = vec![Complex64::default(); m * m];
        for ky in 0..m {
            for kx in 0..m {
                let mut s = Complex64::default();
                for y in 0..m {
                    for xx in 0..m {
                        let phase = sign * 2.0 * std::f64::consts::PI * ((kx * xx + ky * y) as f64)
                            / m as f64;
                        s += x[y * m + xx] * Complex64::new(phase.cos(), phase.sin());
                    }
                }
                out[ky * m + kx] = s;
            }
        }
        out
    }

    fn test_real(m: usize) -> Vec<f64> {
        (0..m * m)
            .map(|i| ((i * 37 + 11) % 17) as f64 / 7.0 - 1.0)
            .collect()
    }

    #[test]
    fn transforms_match_the_direct_dft_definition() {
        let m = 6;
        let real = test_real(m);
        let x: Vec<Complex64> = real
            .iter()
            .enumerate()
            .map(|(i, &v)| Complex64::new(v, (i % 5) as f64 * 0.3))
            .collect();
        let fft = SquareFft::new(m);
        let mut f = x.clone();
        fft.forward(&mut f);
        let mut b = x.clone();
        fft.inverse_unnormalised(&mut b);
        let (fd, bd) = (direct(&x, m, -1.0), direct(&x, m, 1.0));
        for i in 0..m * m {
            assert!((f[i] - fd[i]).norm() < 1e-12);
            assert!((b[i] - bd[i]).norm() < 1e-12);
        }
        let rs = fft.real_spectrum(&real);
        let cs = fft.spectrum_of(&real);
        for i in 0..m * m {
            assert!((rs[i] - cs[i]).norm() < 1e-12);
        }
        let back = fft.real_inverse(&rs);
        for i in 0..m * m {
            assert!((back[i] / (m * m) as f64 - real[i]).abs() < 1e-12);
        }
        let mut round = f.clone();
        fft.inverse(&mut round);
        for i in 0..m * m {
            assert!((round[i] - x[i]).norm() < 1e-12);
        }
    }

    #[test]
    fn planner_shares_the_plans_of_a_size() {
        let mut planner = SquareFftPlanner::new();
        let a = planner.plan(16);
        let b = planner.plan(16);
        assert!(Arc::ptr_eq(&a.forward, &b.forward));
        assert!(Arc::ptr_eq(&a.real_inverse, &b.real_inverse));
        assert_eq!(planner.plan(8).size(), 8);
    }

    #[test]
    fn wavenumber_of_the_fundamental_is_the_grid_spacing_in_k() {
        let (m, delta) = (64, 1e-3);
        let dk = 2.0 * std::f64::consts::PI / (m as f64 * delta);
        assert_eq!(wavenumber(1, 0, m, delta), dk);
        assert_eq!(wavenumber(0, m - 1, m, delta), dk);
        assert_eq!(wavenumber(3, m - 4, m, delta), 5.0 * dk);
    }
}
