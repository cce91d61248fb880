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
/// registers); twice as many with AVX-512 (measured at NSIDE 1024 with AVX-512: 8 and 32 lanes
/// slower, 24 no faster).
const SYNTHESIS_LANES: usize = 8;
/// Rings per block in synthesis for portable code (SSE2 has half the register width; wider
/// blocks spill).
const PORTABLE_SYNTHESIS_LANES: usize = 4;
/// Rings per block in the Legendre stage of analysis: the products of a block's lanes are
/// summed in registers down to [`ANALYSIS_ROW`] lanes per degree before they are added to the
/// order's partial sums in memory, so wider blocks mean fewer loads and stores per ring.
const ANALYSIS_LANES: usize = 32;
/// Lanes of the analysis partial sums kept per degree (summed pairwise at the end).
const ANALYSIS_ROW: usize = 8;
/// One degree's analysis partial sums: [`ANALYSIS_ROW`] lanes of Σ ν X_even (re, im) and
/// Σ ν z X_odd (re, im).
type AnalysisRow = [[f64; ANALYSIS_ROW]; 4];

/// Largest size of one band of ring sums (all rings, a band of orders m) in the banded stages:
/// a few MB instead of (lmax + 1) × rings complex values (201 MB at NSIDE 1024).
const BAND_BYTES: usize = 4 << 20;
/// Smallest size of one band of ring sums.
const MIN_BAND_BYTES: usize = 1 << 20;
/// A band of ring sums is at most this fraction of the map's bytes (with its transposed copy,
/// 2 × 1/64 ≈ 3%: the two stay within the transforms' memory target of map + coefficients +
/// 10% at NSIDE 1024, where 2 × 4 MiB were 8% of the map).
const BAND_MAP_FRACTION: usize = 64;
/// Orders per task when a band of ring sums is copied from ring-major to order-major.
const TRANSPOSE_ORDERS: usize = 8;
/// Rings per task when a band of ring sums is copied from order-major to ring-major.
const TRANSPOSE_RINGS: usize = 16;
/// Fewest orders per band for each worker thread, so that the parallel Legendre stage of a
/// band keeps every thread busy (the band width never changes the results' bits).
const ORDERS_PER_THREAD: usize = 4;

/// Synthesis and analysis for one (Nside, lmax); owns the ring geometry and the FFT plans and is
/// meant to be built once and shared (it is `Sync`).
///
/// Of the FFT plans it keeps only the two of the 4·Nside-pixel rings of the equatorial belt
/// (2·Nside + 1 rings); each polar-cap ring length 4i (i < Nside, one ring in each cap) is
/// planned when its two rings are transformed and dropped after. Keeping a plan for every
/// length would take memory of the order of the map itself (about 50 MB at NSIDE 1024, growing
/// as NSIDE²), for a planning cost of a few per cent of one transform.
pub struct HarmonicTransform {
    geometry: RingGeometry,
    lmax: usize,
    pairs: RingPairs,
    log2_norms: Vec<f64>,
    equator_forward: Arc<dyn RealToComplex<f64>>,
    equator_inverse: Arc<dyn ComplexToReal<f64>>,
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
    ///
    /// Takes k = m mod n and whether ⌊m/n⌋ is odd, which the ring stages step along with m
    /// (no division per order).
    fn shift(&mut self, g: Complex64, k: usize, odd_fold: bool, conjugate: bool) -> Complex64 {
        let phase = self.at(k);
        let mut g = g;
        g *= if conjugate { phase.conj() } else { phase };
        if odd_fold {
            g = -g;
        }
        g
    }
}

/// Rings ahead of the current one whose band of spectrum bins the ring stages ask the cache
/// for: each ring's bins of a band are about 1 KB, 32 KB after the previous ring's, so the
/// hardware prefetcher alone leaves every ring's first loads waiting on memory.
const PREFETCH_RINGS_AHEAD: usize = 2;

/// Packed-spectrum index range [lo, hi) of a ring of `n` pixels read or written for the orders
/// m0 … m0 + width − 1 (bins k = m mod n and n − k, both folded to ≤ n/2; the packed layout
/// keeps bin k at 2k, 2k + 1; the Nyquist bin, at index 1, is not included).
fn band_packed_range(n: usize, m0: usize, width: usize) -> (usize, usize) {
    let half = n / 2;
    let a = m0 % n;
    if a + width > n {
        return (0, n);
    }
    let last = a + width - 1;
    let lo = if last > half { a.min(n - last) } else { a };
    let hi = if a <= half { last.min(half) } else { n - a };
    (2 * lo, (2 * hi + 2).min(n))
}

/// `len` zeros in a vector whose pages the kernel is asked to back with huge pages (Linux
/// transparent huge pages in `madvise` mode, a hint: results are the same either way). The
/// ring stages visit every ring of the map once per band of orders, about 1 KB per ring 32 KB
/// apart at NSIDE 1024, so with 4 KiB pages each visit is a TLB miss.
fn huge_page_zeros(len: usize) -> Vec<f64> {
    let mut values: Vec<f64> = Vec::with_capacity(len);
    advise_huge_pages(values.as_mut_ptr(), len);
    values.resize(len, 0.0);
    values
}

/// Ask for huge pages on the whole 2 MiB pages inside `len` values from `ptr`, before they are
/// first touched.
#[cfg(target_os = "linux")]
fn advise_huge_pages(ptr: *mut f64, len: usize) {
    const HUGE_PAGE: usize = 2 << 20;
    let start = ptr as usize;
    let end = start + len * std::mem::size_of::<f64>();
    let first = start.next_multiple_of(HUGE_PAGE);
    if end > first && end - first >= HUGE_PAGE {
        let bytes = (end - first) / HUGE_PAGE * HUGE_PAGE;
        // SAFETY: the range lies inside the vector's own allocation; MADV_HUGEPAGE only
        // changes how the kernel backs it, and a refusal leaves it as it was.
        unsafe { libc::madvise(first as *mut libc::c_void, bytes, libc::MADV_HUGEPAGE) };
    }
}

#[cfg(not(target_os = "linux"))]
fn advise_huge_pages(_ptr: *mut f64, _len: usize) {}

/// Ask the cache for the values at `values[range]` (a hint: no effect on results).
#[inline(always)]
fn prefetch_range(values: *const f64, (lo, hi): (usize, usize)) {
    #[cfg(target_arch = "x86_64")]
    for i in (lo..hi).step_by(8) {
        // SAFETY: a prefetch is a hint that reads nothing architecturally and never faults,
        // whatever the address; `wrapping_add` keeps the pointer arithmetic defined.
        unsafe {
            std::arch::x86_64::_mm_prefetch::<{ std::arch::x86_64::_MM_HINT_T0 }>(
                values.wrapping_add(i).cast(),
            )
        };
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (values, lo, hi);
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
        let pairs = RingPairs::new(
            rings[..npairs].iter().map(|r| r.z).collect(),
            rings[..npairs].iter().map(|r| r.sin_theta).collect(),
        );
        let mut planner = RealFftPlanner::<f64>::new();
        Ok(HarmonicTransform {
            lmax,
            pairs,
            log2_norms: log2_sectoral_norms(lmax),
            equator_forward: planner.plan_fft_forward(4 * nside),
            equator_inverse: planner.plan_fft_inverse(4 * nside),
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

    pub(crate) fn ring_count(&self) -> usize {
        self.geometry.rings().len()
    }

    /// Legendre-stage slot of ring q: (pair, side) with side 0 north, 1 south.
    pub(crate) fn slot(&self, q: usize) -> usize {
        let npairs = self.pairs.len();
        if q < npairs {
            2 * q
        } else {
            2 * (self.ring_count() - 1 - q) + 1
        }
    }

    /// Rings that share a real-FFT plan, with the values of each ring (`per_ring`, in ring
    /// order): the two rings of each polar-cap length (north and south), then each ring of the
    /// equatorial belt alone.
    fn plan_groups<T>(&self, per_ring: Vec<T>) -> Vec<Vec<(usize, T)>> {
        let last = self.ring_count() - 1;
        let polar = self.nside() - 1;
        let mut slots: Vec<Option<T>> = per_ring.into_iter().map(Some).collect();
        let mut take = |q: usize| (q, slots[q].take().expect("each ring once"));
        let mut groups = Vec::with_capacity(self.ring_count() - polar);
        for p in 0..polar {
            groups.push(vec![take(p), take(last - p)]);
        }
        for q in polar..=last - polar {
            groups.push(vec![take(q)]);
        }
        groups
    }

    /// The forward real-FFT plan of rings of `n` pixels (kept for the equatorial length,
    /// planned anew for a polar-cap one).
    pub(crate) fn forward_plan(&self, n: usize) -> Arc<dyn RealToComplex<f64>> {
        if n == self.equator_forward.len() {
            Arc::clone(&self.equator_forward)
        } else {
            RealFftPlanner::<f64>::new().plan_fft_forward(n)
        }
    }

    /// The inverse real-FFT plan of rings of `n` pixels (see [`Self::forward_plan`]).
    pub(crate) fn inverse_plan(&self, n: usize) -> Arc<dyn ComplexToReal<f64>> {
        if n == self.equator_inverse.len() {
            Arc::clone(&self.equator_inverse)
        } else {
            RealFftPlanner::<f64>::new().plan_fft_inverse(n)
        }
    }

    /// `values` (RING order, the whole map) cut into its rings.
    fn ring_slices<'v>(&self, values: &'v mut [f64]) -> Vec<&'v mut [f64]> {
        let mut out = Vec::with_capacity(self.ring_count());
        let mut rest = values;
        for ring in self.geometry.rings() {
            let (head, tail) = rest.split_at_mut(ring.pixel_count);
            out.push(head);
            rest = tail;
        }
        out
    }

    /// Map values (RING order, 12 Nside² pixels) of f = Σ_ℓm a_ℓm Y_ℓm for real-map
    /// coefficients (healpy 1.20.1 `alm2map`). `alm.lmax()` must equal the transform's lmax.
    pub fn synthesis(&self, alm: &HarmonicCoefficients) -> Result<Vec<f64>> {
        self.check_lmax(alm)?;
        let mut map = huge_page_zeros(self.pixel_count());
        self.synthesis_into(alm, &mut map);
        Ok(map)
    }

    fn check_lmax(&self, alm: &HarmonicCoefficients) -> Result<()> {
        if alm.lmax() != self.lmax {
            return Err(Error::Mismatch(format!(
                "coefficients have lmax {}, the transform was built for lmax {}",
                alm.lmax(),
                self.lmax
            )));
        }
        Ok(())
    }

    /// [`Self::synthesis`] written over `map` (its 12 Nside² values are replaced).
    fn synthesis_into(&self, alm: &HarmonicCoefficients, map: &mut [f64]) {
        let lmax = self.lmax;
        let stride = 2 * self.pairs.len();
        let band = self.orders_per_band();
        // Each ring's half spectrum is accumulated in place in its slice of the map, packed as
        // [Re X_0, Re X_{n/2}, Re X_1, Im X_1, …] (the imaginary parts of the DC and Nyquist
        // bins are dropped: they are set to zero before the inverse FFT anyway).
        map.fill(0.0);
        let mut ring_slices = self.ring_slices(map);
        // Ring sums F_m of every ring for one band of orders at a time, m-major.
        let mut sums = vec![Complex64::new(0.0, 0.0); band.min(lmax + 1) * stride];
        let mut by_ring = vec![Complex64::new(0.0, 0.0); band.min(lmax + 1) * self.ring_count()];
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
            // (orders in increasing m, as in a single pass over all of them), reading each
            // ring's sums contiguously from the band transposed to ring order.
            let width = m1 - m0;
            let by_ring = &mut by_ring[..width * self.ring_count()];
            self.slots_to_rings(sums, width, by_ring);
            let by_ring = &*by_ring;
            // Each ring's start, as an address (only ever used for prefetch hints).
            let starts: Vec<usize> = ring_slices.iter().map(|r| r.as_ptr() as usize).collect();
            ring_slices
                .par_iter_mut()
                .enumerate()
                .for_each(|(q, values)| {
                    let rings = self.geometry.rings();
                    if let Some(ahead) = rings.get(q + PREFETCH_RINGS_AHEAD) {
                        let range = band_packed_range(ahead.pixel_count, m0, width);
                        prefetch_range(starts[q + PREFETCH_RINGS_AHEAD] as *const f64, range);
                    }
                    let ring = &rings[q];
                    let n = ring.pixel_count;
                    let half = n / 2;
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
                    // k = m mod n and the parity of ⌊m/n⌋, stepped along with m.
                    let (mut k, mut odd_fold) = (m0 % n, (m0 / n) % 2 == 1);
                    for (m, &f) in (m0..m1).zip(&by_ring[q * width..(q + 1) * width]) {
                        let g = if ring.half_pixel_shift {
                            phases.shift(f, k, odd_fold, false)
                        } else {
                            f
                        };
                        if k <= half {
                            add(k, g);
                        }
                        if m > 0 {
                            let k2 = if k == 0 { 0 } else { n - k };
                            if k2 <= half {
                                add(k2, g.conj());
                            }
                        }
                        k += 1;
                        if k == n {
                            (k, odd_fold) = (0, !odd_fold);
                        }
                    }
                });
        }
        drop((sums, by_ring));
        // Inverse real FFT of each ring, in place, one plan per group of rings of one length.
        self.plan_groups(ring_slices)
            .into_par_iter()
            .for_each(|group| {
                let plan = self.inverse_plan(group[0].1.len());
                let mut spectrum = plan.make_input_vec();
                let mut scratch = plan.make_scratch_vec();
                for (_, values) in group {
                    let half = values.len() / 2;
                    // Hermitian: the DC and Nyquist bins are real (n is always even).
                    spectrum[0] = Complex64::new(values[0], 0.0);
                    spectrum[half] = Complex64::new(values[1], 0.0);
                    for (k, x) in spectrum.iter_mut().enumerate().take(half).skip(1) {
                        *x = Complex64::new(values[2 * k], values[2 * k + 1]);
                    }
                    plan.process_with_scratch(&mut spectrum, values, &mut scratch)
                        .expect("FFT buffers sized from the plan");
                }
            });
    }

    /// Coefficients a_ℓm up to lmax of a RING-ordered map with `iterations` Jacobi refinements
    /// (healpy 1.20.1 `map2alm(map, lmax, mmax=lmax, iter=iterations, use_weights=False)`;
    /// [`DEFAULT_ANALYSIS_ITERATIONS`] = 3 is healpy's default).
    ///
    /// Memory beyond the map and the coefficients: one map-sized work array (the ring spectra,
    /// then the residuals of the iterations) and a few MB; [`Self::analysis_owned`] works in the
    /// caller's array instead when there are no iterations.
    pub fn analysis(&self, map: &[f64], iterations: usize) -> Result<HarmonicCoefficients> {
        self.check_map(map)?;
        let mut work = Vec::with_capacity(map.len());
        advise_huge_pages(work.as_mut_ptr(), map.len());
        work.extend_from_slice(map);
        let mut alm = HarmonicCoefficients::zeros(self.lmax);
        self.analysis_in_place(&mut work, &mut alm, false);
        for _ in 0..iterations {
            self.synthesis_into(&alm, &mut work);
            for (r, m) in work.iter_mut().zip(map) {
                *r = m - *r;
            }
            self.analysis_in_place(&mut work, &mut alm, true);
        }
        Ok(alm)
    }

    /// As [`Self::analysis`], using `map`'s own storage for the ring spectra when `iterations`
    /// is 0 (no second map-sized array; the values are consumed).
    pub fn analysis_owned(
        &self,
        mut map: Vec<f64>,
        iterations: usize,
    ) -> Result<HarmonicCoefficients> {
        if iterations > 0 {
            return self.analysis(&map, iterations);
        }
        self.check_map(&map)?;
        let mut alm = HarmonicCoefficients::zeros(self.lmax);
        self.analysis_in_place(&mut map, &mut alm, false);
        Ok(alm)
    }

    fn check_map(&self, map: &[f64]) -> Result<()> {
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
        Ok(())
    }

    /// One quadrature pass A(values), written into `alm` (added to it when `accumulate`).
    /// `values` (RING order) is overwritten with each ring's half spectrum, packed as in
    /// synthesis.
    fn analysis_in_place(
        &self,
        values: &mut [f64],
        alm: &mut HarmonicCoefficients,
        accumulate: bool,
    ) {
        let lmax = self.lmax;
        let weight = 4.0 * std::f64::consts::PI / self.pixel_count() as f64;
        let rings = self.geometry.rings();
        // Real FFT of every ring, once, into its own slice.
        self.plan_groups(self.ring_slices(values))
            .into_par_iter()
            .for_each(|group| {
                let plan = self.forward_plan(group[0].1.len());
                let mut input = plan.make_input_vec();
                let mut spectrum = plan.make_output_vec();
                let mut scratch = plan.make_scratch_vec();
                for (_, values) in group {
                    let half = values.len() / 2;
                    input.copy_from_slice(values);
                    plan.process_with_scratch(&mut input, &mut spectrum, &mut scratch)
                        .expect("FFT buffers sized from the plan");
                    // DC and Nyquist bins are real (their imaginary parts are exactly 0).
                    values[0] = spectrum[0].re;
                    values[1] = spectrum[half].re;
                    for k in 1..half {
                        values[2 * k] = spectrum[k].re;
                        values[2 * k + 1] = spectrum[k].im;
                    }
                }
            });
        let values = &*values;
        let mut order_slices = Vec::with_capacity(lmax + 1);
        let mut rest: &mut [Complex64] = alm.as_mut_slice();
        for m in 0..=lmax {
            let (head, tail) = rest.split_at_mut(lmax + 1 - m);
            order_slices.push(Some(head));
            rest = tail;
        }
        let band = self.orders_per_band();
        let stride = 2 * self.pairs.len();
        // Weighted azimuthal sums G_m of every ring for one band of orders, ring-major, and the
        // same by order.
        let mut sums = vec![Complex64::new(0.0, 0.0); self.ring_count() * band.min(lmax + 1)];
        let mut by_slot = vec![Complex64::new(0.0, 0.0); stride * band.min(lmax + 1)];
        for m0 in (0..=lmax).step_by(band) {
            let m1 = (m0 + band).min(lmax + 1);
            let width = m1 - m0;
            let sums = &mut sums[..self.ring_count() * width];
            // Ring stage: fold and phase-shift each ring's spectrum onto the band's orders.
            sums.par_chunks_mut(width).enumerate().for_each(|(q, out)| {
                if let Some(ahead) = rings.get(q + PREFETCH_RINGS_AHEAD) {
                    let range = band_packed_range(ahead.pixel_count, m0, width);
                    prefetch_range(values[ahead.first_pixel..].as_ptr(), range);
                }
                let ring = &rings[q];
                let n = ring.pixel_count;
                let half = n / 2;
                let packed = &values[ring.first_pixel..ring.first_pixel + n];
                let bin = |k: usize| {
                    if k == 0 {
                        Complex64::new(packed[0], 0.0)
                    } else if k == half {
                        Complex64::new(packed[1], 0.0)
                    } else {
                        Complex64::new(packed[2 * k], packed[2 * k + 1])
                    }
                };
                let mut phases = PhaseWalk::new(ring.phi0);
                // k = m mod n and the parity of ⌊m/n⌋, stepped along with m.
                let (mut k, mut odd_fold) = (m0 % n, (m0 / n) % 2 == 1);
                for o in out.iter_mut() {
                    let c = if k <= half { bin(k) } else { bin(n - k).conj() };
                    let g = if ring.half_pixel_shift {
                        phases.shift(c, k, odd_fold, true)
                    } else {
                        c
                    };
                    *o = g * weight;
                    k += 1;
                    if k == n {
                        (k, odd_fold) = (0, !odd_fold);
                    }
                }
            });
            // Legendre stage: one order m per task, writing its own slice of the coefficients,
            // reading its order's sums from the band transposed to slot order.
            let by_slot = &mut by_slot[..width * stride];
            self.rings_to_slots(sums, width, by_slot);
            let by_slot = &*by_slot;
            order_slices[m0..m1]
                .par_iter_mut()
                .enumerate()
                .for_each_init(Vec::new, |rows, (i, out)| {
                    let m = m0 + i;
                    let out = out.take().expect("each order is visited once");
                    let ring_sums = &by_slot[i * stride..(i + 1) * stride];
                    self.analysis_order(m, ring_sums, out, accumulate, rows);
                });
        }
    }

    /// A band of ring sums, ring-major (`src[q·width + i]`, ring q, i-th order of the band),
    /// copied to order-major by Legendre-stage slot (`dst[i·stride + slot(q)]`, stride
    /// 2·pairs), so each order reads its sums contiguously. The south slot of the equator ring
    /// is never written (it stays 0).
    fn rings_to_slots(&self, src: &[Complex64], width: usize, dst: &mut [Complex64]) {
        let stride = 2 * self.pairs.len();
        dst.par_chunks_mut(stride * TRANSPOSE_ORDERS)
            .enumerate()
            .for_each(|(c, out)| {
                let i0 = c * TRANSPOSE_ORDERS;
                let count = out.len() / stride;
                for q in 0..self.ring_count() {
                    let slot = self.slot(q);
                    let from = &src[q * width + i0..q * width + i0 + count];
                    for (t, &v) in from.iter().enumerate() {
                        out[t * stride + slot] = v;
                    }
                }
            });
    }

    /// The inverse copy of [`Self::rings_to_slots`]: order-major by slot to ring-major.
    fn slots_to_rings(&self, src: &[Complex64], width: usize, dst: &mut [Complex64]) {
        let stride = 2 * self.pairs.len();
        dst.par_chunks_mut(width * TRANSPOSE_RINGS)
            .enumerate()
            .for_each(|(c, out)| {
                let q0 = c * TRANSPOSE_RINGS;
                let count = out.len() / width;
                for i in 0..width {
                    for t in 0..count {
                        out[t * width + i] = src[i * stride + self.slot(q0 + t)];
                    }
                }
            });
    }

    /// Orders per band in the banded stages: as many as keep one band's ring sums near
    /// 1/[`BAND_MAP_FRACTION`] of the map, between [`MIN_BAND_BYTES`] and [`BAND_BYTES`], and
    /// at least [`ORDERS_PER_THREAD`] per worker thread.
    fn orders_per_band(&self) -> usize {
        let per_order = self.ring_count() * std::mem::size_of::<Complex64>();
        let map_bytes = 12 * self.nside() * self.nside() * std::mem::size_of::<f64>();
        let band_bytes = (map_bytes / BAND_MAP_FRACTION).clamp(MIN_BAND_BYTES, BAND_BYTES);
        (band_bytes / per_order).max(ORDERS_PER_THREAD * rayon::current_num_threads())
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
        ring_sums: &[Complex64],
        out: &mut [Complex64],
        accumulate: bool,
        rows: &mut Vec<AnalysisRow>,
    ) {
        let rec = OrderRecurrence::new(m, self.lmax);
        let (norm, pairs, acc) = (self.log2_norms[m], &self.pairs, accumulate);
        // SAFETY (both arms): the kernel variant was chosen from the CPU's reported features.
        #[cfg(target_arch = "x86_64")]
        match self.kernel {
            LegendreKernel::Avx512Fma => {
                unsafe {
                    fused::analysis_order_avx512(&rec, norm, pairs, ring_sums, out, acc, rows)
                };
                return;
            }
            LegendreKernel::Avx2Fma => {
                unsafe { fused::analysis_order_avx2(&rec, norm, pairs, ring_sums, out, acc, rows) };
                return;
            }
            LegendreKernel::Portable => {}
        }
        analysis_order::<PlainMulAdd, ANALYSIS_LANES, ANALYSIS_ROW>(
            &rec, norm, pairs, ring_sums, out, acc, rows,
        );
    }
}

/// The Legendre kernels compiled for AVX2 + FMA and for AVX-512F + FMA (twice the block width
/// in synthesis, where the wider registers hold the lane state).
#[cfg(target_arch = "x86_64")]
mod fused {
    use super::*;

    /// A synthesis and an analysis kernel compiled with the given target features.
    macro_rules! kernels {
        ($features:literal, $synthesis:ident, $analysis:ident, $synthesis_lanes:expr) => {
            /// # Safety
            /// The CPU must support the target features.
            #[target_feature(enable = $features)]
            pub(super) unsafe fn $synthesis(
                rec: &OrderRecurrence,
                norm: f64,
                pairs: &RingPairs,
                alm: &[Complex64],
                out: &mut [Complex64],
            ) {
                synthesis_order::<FusedMulAdd, { $synthesis_lanes }>(rec, norm, pairs, alm, out)
            }

            /// # Safety
            /// The CPU must support the target features.
            #[target_feature(enable = $features)]
            pub(super) unsafe fn $analysis(
                rec: &OrderRecurrence,
                norm: f64,
                pairs: &RingPairs,
                ring_sums: &[Complex64],
                out: &mut [Complex64],
                accumulate: bool,
                rows: &mut Vec<AnalysisRow>,
            ) {
                analysis_order::<FusedMulAdd, ANALYSIS_LANES, ANALYSIS_ROW>(
                    rec, norm, pairs, ring_sums, out, accumulate, rows,
                )
            }
        };
    }

    kernels!(
        "avx2,fma",
        synthesis_order_avx2,
        analysis_order_avx2,
        SYNTHESIS_LANES
    );
    kernels!(
        "avx512f,avx2,fma",
        synthesis_order_avx512,
        analysis_order_avx512,
        2 * SYNTHESIS_LANES
    );
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

    // The range covers every packed index the ring stages touch for a band (checked by
    // listing the bins k = m mod n and n − k folded to ≤ n/2, as the stages do).
    #[test]
    fn band_packed_range_covers_the_bins_of_the_band() {
        for n in [4usize, 8, 12, 40, 64] {
            for m0 in 0..3 * n {
                for width in 1..2 * n {
                    let (lo, hi) = band_packed_range(n, m0, width);
                    assert!(hi <= n);
                    for m in m0..m0 + width {
                        let k = m % n;
                        // (The Nyquist bin, kept at index 1 beside the DC bin, is left out.)
                        for bin in [k, (n - k) % n] {
                            if bin < n / 2 {
                                let (at, end) = if bin == 0 {
                                    (0, 1)
                                } else {
                                    (2 * bin, 2 * bin + 2)
                                };
                                assert!(
                                    at >= lo && end <= hi,
                                    "n={n} m0={m0} width={width} bin={bin} range=({lo},{hi})"
                                );
                            }
                        }
                    }
                }
            }
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
