//! Spherical harmonic synthesis (a_ℓm → map) and analysis (map → a_ℓm) on the HEALPix RING
//! grid.
//!
//! Synthesis: f(θ_r, φ_j) = Σ_m F_m(θ_r) e^{imφ_j}, F_m(θ) = Σ_ℓ a_ℓm λ_ℓm(θ), with
//! F_−m = conj(F_m) for a real map; healpy's Y_ℓm = λ_ℓm(θ) e^{imφ} (Condon–Shortley phase in
//! λ_ℓm). Analysis by plain quadrature with equal pixel weights 4π/Npix (healpy 1.20.1
//! `map2alm(..., use_weights=False)`): a_ℓm = (4π/Npix) Σ_r λ_ℓm(θ_r) Σ_j f_rj e^{−imφ_j},
//! refined by Jacobi iterations a_{k+1} = a_k + A(f − S a_k) (healpy's `iter`).
//!
//! Work is split in two stages, each parallel with rayon over independent outputs (so results
//! are bitwise identical for any thread count): the Legendre stage over orders m, computing
//! λ_ℓm on the fly for blocks of rings and using the north/south symmetry; the ring stage over
//! rings, one real FFT per ring. On a ring with n pixels starting at φ0, e^{imφ_j} =
//! e^{imφ0} e^{2πi(m mod n)j/n}, so orders m ≥ n fold onto frequency m mod n with the phase
//! e^{imφ0}; as n φ0 is 0 or π, e^{imφ0} = e^{ikφ0}(±1)^⌊m/n⌋ with k = m mod n.

use std::sync::Arc;

use num_complex::Complex64;
use rayon::prelude::*;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};

use super::coefficients::HarmonicCoefficients;
use super::geometry::RingGeometry;
use super::legendre::{
    analysis_order, log2_sectoral_norms, synthesis_order, FusedMulAdd, OrderRecurrence,
    PlainMulAdd, RingPairs,
};
use crate::error::{Error, Result};

/// Number of Jacobi iterations healpy's `map2alm` uses by default (`iter=3`).
pub const DEFAULT_ANALYSIS_ITERATIONS: usize = 3;

/// Rings per block in the Legendre stage of synthesis with AVX2 (all lane state stays in
/// registers); twice as many with AVX-512.
const SYNTHESIS_LANES: usize = 8;
/// Rings per block in synthesis for portable code (SSE2 has half the register width; wider
/// blocks spill).
const PORTABLE_SYNTHESIS_LANES: usize = 4;
/// Rings per block in the Legendre stage of analysis (partial sums live in a small buffer,
/// so wider blocks amortise the per-ℓ loads).
const ANALYSIS_LANES: usize = 16;
// The lane sums in the analysis stage are pairwise over a power-of-two width.
const _: () = assert!(ANALYSIS_LANES.is_power_of_two());

/// Target size of one band of ring sums (all rings, a band of orders m) in the banded stages:
/// a few MB instead of (lmax + 1) × rings complex values (201 MB at NSIDE 1024).
const BAND_BYTES: usize = 4 << 20;
/// Most bands in analysis, which repeats the real FFT of every ring per band (each pass costs
/// about 2% of an analysis at NSIDE 512 and 1024): 3 bands keep the CPU time within a few % of
/// a single pass while its ring sums take a third of the memory.
const ANALYSIS_MAX_BANDS: usize = 3;

/// Synthesis and analysis for one (Nside, lmax); owns the ring geometry and the FFT plans and is
/// meant to be built once and shared (it is `Sync`).
pub struct HarmonicTransform {
    geometry: RingGeometry,
    lmax: usize,
    pairs: RingPairs,
    log2_norms: Vec<f64>,
    forward: Vec<Arc<dyn RealToComplex<f64>>>,
    inverse: Vec<Arc<dyn ComplexToReal<f64>>>,
    kernel: LegendreKernel,
}

/// Compiled variants of the Legendre kernels: the same arithmetic at different SIMD widths, with
/// or without fused multiply-add (results agree to rounding). Chosen once per transform.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LegendreKernel {
    /// Portable code, separate multiply and add.
    Portable,
    /// AVX2 with fused multiply-add.
    Avx2Fma,
    /// AVX-512F with fused multiply-add.
    Avx512Fma,
}

impl LegendreKernel {
    /// Whether this CPU can run the variant (run-time feature detection).
    pub fn is_available(self) -> bool {
        match self {
            LegendreKernel::Portable => true,
            #[cfg(target_arch = "x86_64")]
            LegendreKernel::Avx2Fma => {
                std::arch::is_x86_feature_detected!("avx2")
                    && std::arch::is_x86_feature_detected!("fma")
            }
            #[cfg(target_arch = "x86_64")]
            LegendreKernel::Avx512Fma => {
                std::arch::is_x86_feature_detected!("avx512f")
                    && std::arch::is_x86_feature_detected!("fma")
            }
            #[cfg(not(target_arch = "x86_64"))]
            _ => false,
        }
    }

    /// All variants this CPU can run, portable first.
    pub fn available() -> Vec<LegendreKernel> {
        [
            LegendreKernel::Portable,
            LegendreKernel::Avx2Fma,
            LegendreKernel::Avx512Fma,
        ]
        .into_iter()
        .filter(|k| k.is_available())
        .collect()
    }

    /// The widest variant this CPU can run.
    pub fn best_available() -> LegendreKernel {
        *Self::available()
            .last()
            .unwrap_or(&LegendreKernel::Portable)
    }

    /// Short name: "portable", "avx2+fma" or "avx512f+fma".
    pub fn name(self) -> &'static str {
        match self {
            LegendreKernel::Portable => "portable",
            LegendreKernel::Avx2Fma => "avx2+fma",
            LegendreKernel::Avx512Fma => "avx512f+fma",
        }
    }
}

impl std::fmt::Debug for HarmonicTransform {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("HarmonicTransform")
            .field("nside", &self.geometry.nside())
            .field("lmax", &self.lmax)
            .field("kernel", &self.kernel)
            .finish()
    }
}

/// e^{ikφ0} for increasing k (jumps back are allowed), by repeated multiplication re-anchored
/// with a direct sin/cos at every multiple of 32 (error a few ulp); a jump re-anchors at the
/// multiple of 32 below, so each k gets the same bits however it is reached. Used where a band
/// of orders needs only some k.
pub(crate) struct PhaseWalk {
    phi0: f64,
    step: Complex64,
    next: usize,
    w: Complex64,
}

impl PhaseWalk {
    pub(crate) fn new(phi0: f64) -> Self {
        PhaseWalk {
            phi0,
            step: Complex64::from_polar(1.0, phi0),
            next: 0,
            w: Complex64::from_polar(1.0, 0.0 * phi0),
        }
    }

    pub(crate) fn at(&mut self, k: usize) -> Complex64 {
        if k != self.next {
            let anchor = k - k % 32;
            self.w = Complex64::from_polar(1.0, anchor as f64 * self.phi0);
            for _ in anchor..k {
                self.w *= self.step;
            }
        }
        let value = self.w;
        self.next = k + 1;
        if self.next.is_multiple_of(32) {
            self.w = Complex64::from_polar(1.0, self.next as f64 * self.phi0);
        } else {
            self.w *= self.step;
        }
        value
    }

    /// g·e^{i m φ0} (synthesis), or g·e^{−i m φ0} when `conjugate` (analysis), on a ring of n
    /// pixels starting at φ0 = π/n: e^{i m φ0} = e^{i k φ0} (−1)^{⌊m/n⌋} with k = m mod n,
    /// since n φ0 = π.
    fn shift(&mut self, g: Complex64, m: usize, n: usize, conjugate: bool) -> Complex64 {
        let phase = self.at(m % n);
        let mut g = g;
        g *= if conjugate { phase.conj() } else { phase };
        if (m / n) % 2 == 1 {
            g = -g;
        }
        g
    }
}

impl HarmonicTransform {
    /// Transform for maps of `nside` and coefficients up to `lmax` ≤ 3·nside − 1.
    pub fn new(nside: usize, lmax: usize) -> Result<Self> {
        Self::with_kernel(nside, lmax, LegendreKernel::best_available())
    }

    /// As [`HarmonicTransform::new`] with a chosen Legendre kernel variant (an error if this CPU
    /// cannot run it). All variants agree to rounding; each is bitwise reproducible for any
    /// thread count.
    pub fn with_kernel(nside: usize, lmax: usize, kernel: LegendreKernel) -> Result<Self> {
        if !kernel.is_available() {
            return Err(Error::Setting(format!(
                "the {} harmonic transform kernel needs CPU features this machine lacks",
                kernel.name()
            )));
        }
        let geometry = RingGeometry::new(nside)?;
        if lmax > 3 * nside - 1 {
            return Err(Error::Setting(format!(
                "lmax {lmax} is above 3*NSIDE-1 = {} for NSIDE {nside}",
                3 * nside - 1
            )));
        }
        let rings = geometry.rings();
        let npairs = 2 * nside;
        let pairs = RingPairs {
            z: rings[..npairs].iter().map(|r| r.z).collect(),
            sin_theta: rings[..npairs].iter().map(|r| r.sin_theta).collect(),
        };
        let mut planner = RealFftPlanner::<f64>::new();
        let forward = rings
            .iter()
            .map(|r| planner.plan_fft_forward(r.pixel_count))
            .collect();
        let inverse = rings
            .iter()
            .map(|r| planner.plan_fft_inverse(r.pixel_count))
            .collect();
        Ok(HarmonicTransform {
            lmax,
            pairs,
            log2_norms: log2_sectoral_norms(lmax),
            forward,
            inverse,
            kernel,
            geometry,
        })
    }

    /// The ring geometry of the maps.
    pub fn geometry(&self) -> &RingGeometry {
        &self.geometry
    }

    /// HEALPix resolution parameter.
    pub fn nside(&self) -> usize {
        self.geometry.nside()
    }

    /// Largest multipole.
    pub fn lmax(&self) -> usize {
        self.lmax
    }

    /// The Legendre kernel variant in use.
    pub fn kernel(&self) -> LegendreKernel {
        self.kernel
    }

    /// Number of map pixels, 12 Nside².
    pub fn pixel_count(&self) -> usize {
        self.geometry.pixel_count()
    }

    fn ring_count(&self) -> usize {
        self.geometry.rings().len()
    }

    /// Legendre-stage slot of ring q: (pair, side) with side 0 north, 1 south.
    fn slot(&self, q: usize) -> usize {
        let npairs = self.pairs.len();
        if q < npairs {
            2 * q
        } else {
            2 * (self.ring_count() - 1 - q) + 1
        }
    }

    /// Map values (RING order, 12 Nside² pixels) of f = Σ_ℓm a_ℓm Y_ℓm for real-map
    /// coefficients (healpy 1.20.1 `alm2map`). `alm.lmax()` must equal the transform's lmax.
    pub fn synthesis(&self, alm: &HarmonicCoefficients) -> Result<Vec<f64>> {
        if alm.lmax() != self.lmax {
            return Err(Error::Mismatch(format!(
                "coefficients have lmax {}, the transform was built for lmax {}",
                alm.lmax(),
                self.lmax
            )));
        }
        let lmax = self.lmax;
        let stride = 2 * self.pairs.len();
        let band = self.orders_per_band(usize::MAX);
        // Each ring's half spectrum is accumulated in place in its slice of the map, packed as
        // [Re X_0, Re X_{n/2}, Re X_1, Im X_1, …] (the imaginary parts of the DC and Nyquist
        // bins are dropped: they are set to zero before the inverse FFT anyway).
        let mut map = vec![0.0; self.pixel_count()];
        let mut ring_slices = Vec::with_capacity(self.ring_count());
        let mut rest: &mut [f64] = &mut map;
        for ring in self.geometry.rings() {
            let (head, tail) = rest.split_at_mut(ring.pixel_count);
            ring_slices.push(head);
            rest = tail;
        }
        // Ring sums F_m of every ring for one band of orders at a time, m-major.
        let mut sums = vec![Complex64::new(0.0, 0.0); band.min(lmax + 1) * stride];
        for m0 in (0..=lmax).step_by(band) {
            let m1 = (m0 + band).min(lmax + 1);
            let sums = &mut sums[..(m1 - m0) * stride];
            // Legendre stage for the band's orders.
            sums.par_chunks_mut(stride)
                .enumerate()
                .for_each(|(i, out)| {
                    let m = m0 + i;
                    self.synthesis_order(m, alm.order(m), out)
                });
            // Ring stage: fold and phase-shift the band's orders into each ring's spectrum
            // (orders in increasing m, as in a single pass over all of them).
            let sums = &*sums;
            ring_slices
                .par_iter_mut()
                .enumerate()
                .for_each(|(q, values)| {
                    let ring = &self.geometry.rings()[q];
                    let n = ring.pixel_count;
                    let half = n / 2;
                    let slot = self.slot(q);
                    let mut phases = PhaseWalk::new(ring.phi0);
                    let mut add = |k: usize, g: Complex64| {
                        if k == 0 {
                            values[0] += g.re;
                        } else if k == half {
                            values[1] += g.re;
                        } else {
                            values[2 * k] += g.re;
                            values[2 * k + 1] += g.im;
                        }
                    };
                    for m in m0..m1 {
                        let f = sums[(m - m0) * stride + slot];
                        let k = m % n;
                        let g = if ring.half_pixel_shift {
                            phases.shift(f, m, n, false)
                        } else {
                            f
                        };
                        if k <= half {
                            add(k, g);
                        }
                        if m > 0 {
                            let k2 = (n - k) % n;
                            if k2 <= half {
                                add(k2, g.conj());
                            }
                        }
                    }
                });
        }
        drop(sums);
        // Inverse real FFT of each ring, in place.
        ring_slices
            .into_par_iter()
            .enumerate()
            .for_each(|(q, values)| {
                let n = values.len();
                let half = n / 2;
                let mut spectrum = vec![Complex64::new(0.0, 0.0); half + 1];
                // Hermitian: the DC and Nyquist bins are real (n is always even).
                spectrum[0] = Complex64::new(values[0], 0.0);
                spectrum[half] = Complex64::new(values[1], 0.0);
                for (k, x) in spectrum.iter_mut().enumerate().take(half).skip(1) {
                    *x = Complex64::new(values[2 * k], values[2 * k + 1]);
                }
                let plan = &self.inverse[q];
                let mut scratch = plan.make_scratch_vec();
                plan.process_with_scratch(&mut spectrum, values, &mut scratch)
                    .expect("FFT buffers sized from the plan");
            });
        Ok(map)
    }

    /// Coefficients a_ℓm up to lmax of a RING-ordered map with `iterations` Jacobi refinements
    /// (healpy 1.20.1 `map2alm(map, lmax, mmax=lmax, iter=iterations, use_weights=False)`;
    /// [`DEFAULT_ANALYSIS_ITERATIONS`] = 3 is healpy's default).
    pub fn analysis(&self, map: &[f64], iterations: usize) -> Result<HarmonicCoefficients> {
        if map.len() != self.pixel_count() {
            return Err(Error::Mismatch(format!(
                "map has {} pixels, NSIDE {} needs {}",
                map.len(),
                self.nside(),
                self.pixel_count()
            )));
        }
        if let Some(p) = map.iter().position(|v| !v.is_finite()) {
            return Err(Error::Data(format!(
                "map value at pixel {p} is not finite ({})",
                map[p]
            )));
        }
        let mut alm = self.analysis_once(map);
        for _ in 0..iterations {
            let resynth = self.synthesis(&alm)?;
            let residual: Vec<f64> = map.iter().zip(&resynth).map(|(a, b)| a - b).collect();
            let correction = self.analysis_once(&residual);
            for (a, c) in alm.as_mut_slice().iter_mut().zip(correction.as_slice()) {
                *a += *c;
            }
        }
        Ok(alm)
    }

    /// One quadrature pass A(map).
    fn analysis_once(&self, map: &[f64]) -> HarmonicCoefficients {
        let lmax = self.lmax;
        let weight = 4.0 * std::f64::consts::PI / self.pixel_count() as f64;
        let rings = self.geometry.rings();
        let mut alm = HarmonicCoefficients::zeros(lmax);
        let mut order_slices = Vec::with_capacity(lmax + 1);
        let mut rest: &mut [Complex64] = alm.as_mut_slice();
        for m in 0..=lmax {
            let (head, tail) = rest.split_at_mut(lmax + 1 - m);
            order_slices.push(Some(head));
            rest = tail;
        }
        // Each band repeats the real FFT of every ring (cheaper than keeping all their
        // spectra, which would be as large as the map): few, larger bands.
        let band = self.orders_per_band(ANALYSIS_MAX_BANDS);
        let last_ring = self.ring_count() - 1;
        let npairs = self.pairs.len();
        // Weighted azimuthal sums G_m of every ring for one band of orders, ring-major.
        let mut sums = vec![Complex64::new(0.0, 0.0); self.ring_count() * band.min(lmax + 1)];
        for m0 in (0..=lmax).step_by(band) {
            let m1 = (m0 + band).min(lmax + 1);
            let width = m1 - m0;
            let sums = &mut sums[..self.ring_count() * width];
            // Ring stage: fold and phase-shift each ring's spectrum onto the band's orders.
            sums.par_chunks_mut(width).enumerate().for_each(|(q, out)| {
                let ring = &rings[q];
                let n = ring.pixel_count;
                let half = n / 2;
                let plan = &self.forward[q];
                let mut values = map[ring.first_pixel..ring.first_pixel + n].to_vec();
                let mut spectrum = plan.make_output_vec();
                let mut scratch = plan.make_scratch_vec();
                plan.process_with_scratch(&mut values, &mut spectrum, &mut scratch)
                    .expect("FFT buffers sized from the plan");
                let mut phases = PhaseWalk::new(ring.phi0);
                for (o, m) in out.iter_mut().zip(m0..m1) {
                    let k = m % n;
                    let c = if k <= half {
                        spectrum[k]
                    } else {
                        spectrum[n - k].conj()
                    };
                    let g = if ring.half_pixel_shift {
                        phases.shift(c, m, n, true)
                    } else {
                        c
                    };
                    *o = g * weight;
                }
            });
            // Legendre stage: one order m per task, writing its own slice of the coefficients.
            let sums = &*sums;
            order_slices[m0..m1]
                .par_iter_mut()
                .enumerate()
                .for_each(|(i, out)| {
                    let m = m0 + i;
                    let out = out.take().expect("each order is visited once");
                    let ring_sums = |p: usize| {
                        let north = sums[p * width + i];
                        let south = if p == npairs - 1 && last_ring - p == p {
                            Complex64::new(0.0, 0.0)
                        } else {
                            sums[(last_ring - p) * width + i]
                        };
                        (north, south)
                    };
                    self.analysis_order(m, &ring_sums, out);
                });
        }
        alm
    }

    /// Orders per band in the banded stages: as many as keep one band's ring sums near
    /// [`BAND_BYTES`] (at least one), but no more than `max_bands` bands in all.
    fn orders_per_band(&self, max_bands: usize) -> usize {
        let per_order = self.ring_count() * std::mem::size_of::<Complex64>();
        (BAND_BYTES / per_order)
            .max(1)
            .max((self.lmax + 1).div_ceil(max_bands))
    }

    fn synthesis_order(&self, m: usize, alm: &[Complex64], out: &mut [Complex64]) {
        let rec = OrderRecurrence::new(m, self.lmax);
        let norm = self.log2_norms[m];
        // SAFETY (both arms): the kernel variant was chosen from the CPU's reported features.
        #[cfg(target_arch = "x86_64")]
        match self.kernel {
            LegendreKernel::Avx512Fma => {
                unsafe { fused::synthesis_order_avx512(&rec, norm, &self.pairs, alm, out) };
                return;
            }
            LegendreKernel::Avx2Fma => {
                unsafe { fused::synthesis_order_avx2(&rec, norm, &self.pairs, alm, out) };
                return;
            }
            LegendreKernel::Portable => {}
        }
        synthesis_order::<PlainMulAdd, PORTABLE_SYNTHESIS_LANES>(&rec, norm, &self.pairs, alm, out);
    }

    fn analysis_order(
        &self,
        m: usize,
        ring_sums: &dyn Fn(usize) -> (Complex64, Complex64),
        out: &mut [Complex64],
    ) {
        let rec = OrderRecurrence::new(m, self.lmax);
        let norm = self.log2_norms[m];
        // SAFETY (both arms): the kernel variant was chosen from the CPU's reported features.
        #[cfg(target_arch = "x86_64")]
        match self.kernel {
            LegendreKernel::Avx512Fma => {
                unsafe { fused::analysis_order_avx512(&rec, norm, &self.pairs, ring_sums, out) };
                return;
            }
            LegendreKernel::Avx2Fma => {
                unsafe { fused::analysis_order_avx2(&rec, norm, &self.pairs, ring_sums, out) };
                return;
            }
            LegendreKernel::Portable => {}
        }
        analysis_order::<PlainMulAdd, ANALYSIS_LANES>(&rec, norm, &self.pairs, ring_sums, out);
    }
}

/// The Legendre kernels compiled for AVX2 + FMA and for AVX-512F + FMA (twice the block width
/// in synthesis, where the wider registers hold the lane state).
#[cfg(target_arch = "x86_64")]
mod fused {
    use super::*;

    /// # Safety
    /// The CPU must support AVX2 and FMA.
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn synthesis_order_avx2(
        rec: &OrderRecurrence,
        norm: f64,
        pairs: &RingPairs,
        alm: &[Complex64],
        out: &mut [Complex64],
    ) {
        synthesis_order::<FusedMulAdd, SYNTHESIS_LANES>(rec, norm, pairs, alm, out)
    }

    /// # Safety
    /// The CPU must support AVX2 and FMA.
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn analysis_order_avx2(
        rec: &OrderRecurrence,
        norm: f64,
        pairs: &RingPairs,
        ring_sums: &dyn Fn(usize) -> (Complex64, Complex64),
        out: &mut [Complex64],
    ) {
        analysis_order::<FusedMulAdd, ANALYSIS_LANES>(rec, norm, pairs, ring_sums, out)
    }

    /// # Safety
    /// The CPU must support AVX-512F and FMA.
    #[target_feature(enable = "avx512f,avx2,fma")]
    pub(super) unsafe fn synthesis_order_avx512(
        rec: &OrderRecurrence,
        norm: f64,
        pairs: &RingPairs,
        alm: &[Complex64],
        out: &mut [Complex64],
    ) {
        synthesis_order::<FusedMulAdd, { 2 * SYNTHESIS_LANES }>(rec, norm, pairs, alm, out)
    }

    /// # Safety
    /// The CPU must support AVX-512F and FMA.
    #[target_feature(enable = "avx512f,avx2,fma")]
    pub(super) unsafe fn analysis_order_avx512(
        rec: &OrderRecurrence,
        norm: f64,
        pairs: &RingPairs,
        ring_sums: &dyn Fn(usize) -> (Complex64, Complex64),
        out: &mut [Complex64],
    ) {
        analysis_order::<FusedMulAdd, ANALYSIS_LANES>(rec, norm, pairs, ring_sums, out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// e^{ikφ0} for k = 0 … count − 1 by repeated multiplication, re-anchored with a direct
    /// sin/cos every 32 steps (error a few ulp).
    fn phase_table(phi0: f64, count: usize) -> Vec<Complex64> {
        let step = Complex64::from_polar(1.0, phi0);
        let mut out = Vec::with_capacity(count);
        let mut w = Complex64::new(1.0, 0.0);
        for k in 0..count {
            if k % 32 == 0 {
                w = Complex64::from_polar(1.0, k as f64 * phi0);
            }
            out.push(w);
            w *= step;
        }
        out
    }

    // The walk reached in bands (jumps forward, back and across anchors) gives the bits of the
    // sequential table for every k.
    #[test]
    fn phase_walk_matches_the_sequential_table_bit_for_bit() {
        let phi0 = std::f64::consts::PI / 12.0;
        let table = phase_table(phi0, 200);
        let mut walk = PhaseWalk::new(phi0);
        let visits = (0..70)
            .chain(5..40)
            .chain(150..200)
            .chain(33..35)
            .chain(0..3);
        for k in visits {
            let (a, b) = (walk.at(k), table[k]);
            assert_eq!(
                (a.re.to_bits(), a.im.to_bits()),
                (b.re.to_bits(), b.im.to_bits()),
                "k={k}"
            );
        }
    }

    // Y_00 = 1/√(4π): a_00 = √(4π) is the constant map 1, and equal-weight quadrature of a
    // constant recovers a_00 exactly up to rounding (Σ_p (4π/Npix)·1·Y_00 = √(4π)).
    #[test]
    fn monopole_is_the_constant_map_and_is_recovered_at_nside_one() {
        let t = HarmonicTransform::new(1, 2).unwrap();
        let mut alm = HarmonicCoefficients::zeros(2);
        let a00 = (4.0 * std::f64::consts::PI).sqrt();
        alm.set(0, 0, Complex64::new(a00, 0.0));
        let map = t.synthesis(&alm).unwrap();
        assert_eq!(map.len(), 12);
        assert!(map.iter().all(|v| (v - 1.0).abs() < 1e-15));
        let back = t.analysis(&map, 0).unwrap();
        assert!((back.get(0, 0).re - a00).abs() < 1e-14);
        assert!(back.get(0, 0).im.abs() < 1e-15);
    }

    #[test]
    fn bad_inputs_give_errors_not_panics() {
        assert!(HarmonicTransform::new(4, 12).is_err()); // lmax > 3 Nside − 1
        assert!(HarmonicTransform::new(0, 0).is_err());
        let t = HarmonicTransform::new(4, 11).unwrap();
        assert!(t.analysis(&[0.0; 10], 0).is_err());
        let mut map = vec![0.0; 192];
        map[5] = f64::NAN;
        assert!(t.analysis(&map, 0).is_err());
        assert!(t.synthesis(&HarmonicCoefficients::zeros(10)).is_err());
        assert!(HarmonicCoefficients::from_vec(3, vec![Complex64::new(0.0, 0.0); 9]).is_err());
    }
}
