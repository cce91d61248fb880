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
use super::geometry::{Ring, RingGeometry};
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

/// The azimuthal phases of one ring for orders m ≤ lmax: none when its first pixel sits at
/// φ = 0; for a ring of n pixels starting at φ0 = π/n, e^{i m φ0} = e^{i k φ0} (−1)^{⌊m/n⌋}
/// with k = m mod n (since n φ0 = π), from the table of e^{i k φ0}.
struct RingPhases {
    /// e^{i k φ0} for k < min(n, lmax + 1); empty for an unshifted ring.
    table: Vec<Complex64>,
    shifted: bool,
    pixel_count: usize,
}

impl RingPhases {
    fn new(ring: &Ring, lmax: usize) -> Self {
        let n = ring.pixel_count;
        Self {
            table: if ring.half_pixel_shift {
                phase_table(ring.phi0, n.min(lmax + 1))
            } else {
                Vec::new()
            },
            shifted: ring.half_pixel_shift,
            pixel_count: n,
        }
    }

    /// g·e^{i m φ0} (synthesis), or g·e^{−i m φ0} when `conjugate` (analysis); g itself on an
    /// unshifted ring.
    fn shift(&self, g: Complex64, m: usize, conjugate: bool) -> Complex64 {
        if !self.shifted {
            return g;
        }
        let n = self.pixel_count;
        let phase = self.table[m % n];
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
        // Legendre stage: ring sums F_m for every ring, m-major.
        let mut sums = vec![Complex64::new(0.0, 0.0); (lmax + 1) * stride];
        sums.par_chunks_mut(stride)
            .enumerate()
            .for_each(|(m, out)| self.synthesis_order(m, alm.order(m), out));
        // Ring stage: fold, phase-shift and inverse real FFT, one ring at a time.
        let mut map = vec![0.0; self.pixel_count()];
        let mut ring_slices = Vec::with_capacity(self.ring_count());
        let mut rest: &mut [f64] = &mut map;
        for ring in self.geometry.rings() {
            let (head, tail) = rest.split_at_mut(ring.pixel_count);
            ring_slices.push(head);
            rest = tail;
        }
        ring_slices
            .into_par_iter()
            .enumerate()
            .for_each(|(q, values)| {
                let ring = &self.geometry.rings()[q];
                let n = ring.pixel_count;
                let half = n / 2;
                let slot = self.slot(q);
                let phases = RingPhases::new(ring, lmax);
                let mut spectrum = vec![Complex64::new(0.0, 0.0); half + 1];
                for m in 0..=lmax {
                    let f = sums[m * stride + slot];
                    let k = m % n;
                    let g = phases.shift(f, m, false);
                    if k <= half {
                        spectrum[k] += g;
                    }
                    if m > 0 {
                        let k2 = (n - k) % n;
                        if k2 <= half {
                            spectrum[k2] += g.conj();
                        }
                    }
                }
                // Hermitian: the DC and Nyquist bins are real (n is always even).
                spectrum[0].im = 0.0;
                spectrum[half].im = 0.0;
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
        let width = lmax + 1;
        let weight = 4.0 * std::f64::consts::PI / self.pixel_count() as f64;
        // Ring stage: weighted azimuthal sums G_m of every ring, ring-major.
        let mut sums = vec![Complex64::new(0.0, 0.0); self.ring_count() * width];
        sums.par_chunks_mut(width).enumerate().for_each(|(q, out)| {
            let ring = &self.geometry.rings()[q];
            let n = ring.pixel_count;
            let half = n / 2;
            let plan = &self.forward[q];
            let mut values = map[ring.first_pixel..ring.first_pixel + n].to_vec();
            let mut spectrum = plan.make_output_vec();
            let mut scratch = plan.make_scratch_vec();
            plan.process_with_scratch(&mut values, &mut spectrum, &mut scratch)
                .expect("FFT buffers sized from the plan");
            let phases = RingPhases::new(ring, lmax);
            for (m, o) in out.iter_mut().enumerate() {
                let k = m % n;
                let c = if k <= half {
                    spectrum[k]
                } else {
                    spectrum[n - k].conj()
                };
                *o = phases.shift(c, m, true) * weight;
            }
        });
        // Legendre stage: one order m per task, writing its own slice of the coefficients.
        let mut alm = HarmonicCoefficients::zeros(lmax);
        let mut order_slices = Vec::with_capacity(lmax + 1);
        let mut rest: &mut [Complex64] = alm.as_mut_slice();
        for m in 0..=lmax {
            let (head, tail) = rest.split_at_mut(lmax + 1 - m);
            order_slices.push(head);
            rest = tail;
        }
        let last_ring = self.ring_count() - 1;
        let npairs = self.pairs.len();
        order_slices
            .into_par_iter()
            .enumerate()
            .for_each(|(m, out)| {
                let ring_sums = |p: usize| {
                    let north = sums[p * width + m];
                    let south = if p == npairs - 1 && last_ring - p == p {
                        Complex64::new(0.0, 0.0)
                    } else {
                        sums[(last_ring - p) * width + m]
                    };
                    (north, south)
                };
                self.analysis_order(m, &ring_sums, out);
            });
        alm
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
