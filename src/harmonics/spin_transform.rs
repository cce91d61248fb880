//! Spin-weighted spherical harmonic synthesis (E, B a_ℓm → two real maps) and analysis (maps →
//! E, B a_ℓm) on the HEALPix RING grid, for spin s ≥ 1 (s = 2: polarization Q/U, or the shear
//! γ1/γ2 of weak lensing).
//!
//! **Conventions** (healpy 1.20.1 `alm2map_spin` / `map2alm_spin`, checked in
//! tests/spin_harmonics_against_healpy.rs): with the complex field P = Q + iU on the local basis
//! (e_θ, e_φ) (healpy's "COSMO" polarization convention: Q > 0 along the meridian, U > 0 along
//! the direction half-way from e_θ, pointing south, to e_φ, pointing east),
//!
//! * Q + iU = −Σ_ℓm (E_ℓm + i B_ℓm) ₛY_ℓm, hence Q − iU = −(−1)^s Σ_ℓm (E_ℓm − i B_ℓm) ₋ₛY_ℓm
//!   (from ₛY*_ℓm = (−1)^(s+m) ₋ₛY_ℓ,−m),
//!
//! with E_ℓ,−m = (−1)^m E*_ℓm (and B likewise) and ₛY_ℓm = ₛλ_ℓm(θ) e^{imφ} the spin-weighted
//! harmonics of Goldberg et al. (1967, J. Math. Phys. 8, 2155), Condon–Shortley phase included,
//! given by their explicit sum
//! ₛY_ℓm = (−1)^m √((ℓ+m)!(ℓ−m)!(2ℓ+1)/(4π(ℓ+s)!(ℓ−s)!)) sin^{2ℓ}(θ/2)
//! Σ_r C(ℓ−s, r) C(ℓ+s, r+s−m) (−1)^{ℓ−r−s} e^{imφ} cot^{2r+s−m}(θ/2)
//! (checked against this sum in tests/spin_harmonics_against_healpy.rs). Coefficients with
//! ℓ < s have no harmonic and are ignored in synthesis and zero in analysis.
//!
//! **Recurrence.** ₛλ_ℓm(θ), up to a sign √((2ℓ+1)/(4π)) d^ℓ_{m,−s}(θ), obeys, in ℓ at fixed m and s,
//! the three-term recurrence of the Wigner d functions (Kostelec & Rockmore 2008,
//! J. Fourier Anal. Appl. 14, 145, their eq. (8), equation number from memory; the recursion
//! in ℓ at fixed m for d^ℓ_{m,±s} of the spin transforms of Reinecke & Seljebotn 2013,
//! A&A 554, A112, §2.3, from memory), here for the normalised functions:
//!
//! ₛλ_{ℓ+1,m} = A_ℓ (cos θ + m s/(ℓ(ℓ+1))) ₛλ_ℓm − C_ℓ ₛλ_{ℓ−1,m},
//! A_ℓ = √((2ℓ+3)/(2ℓ+1)) (ℓ+1)(2ℓ+1)/√(((ℓ+1)² − m²)((ℓ+1)² − s²)),
//! C_ℓ = A_ℓ √((2ℓ+1)/(2ℓ−1)) √((ℓ² − m²)(ℓ² − s²))/(ℓ(2ℓ+1)),
//!
//! started at ℓ0 = max(m, |s|) from
//! ₛλ_ℓ0,m = σ √((2ℓ0+1)/(4π) · C(2ℓ0, a)) sin^a(θ/2) cos^b(θ/2), a = |m + s|, b = |m − s|,
//! σ = (−1)^s when s < 0 and m < |s|, else (−1)^m (the single surviving term of the sum
//! above). The spins +s and −s share A_ℓ and C_ℓ and differ only in the sign of m s/(ℓ(ℓ+1)),
//! so both run from one set of coefficients. As in [`super::legendre`], the recurrence runs
//! on λ/c_ℓ (c_ℓ0 = c_ℓ0+1 = 1, c_{ℓ+1} = C_ℓ c_{ℓ−1}), which removes one multiplication per
//! step, and tiny starting values near the poles are carried as v·2^(−500 k) until they grow
//! (Holmes & Featherstone 2002, J. Geodesy 76, 279, scaled recursion).
//!
//! **North/south symmetry:** ₛλ_ℓm(π − θ) = (−1)^(ℓ+m) ₋ₛλ_ℓm(θ) (from ₛY_ℓm(π − θ, φ + π) =
//! (−1)^ℓ ₋ₛY_ℓm(θ, φ), Goldberg et al. 1967), so one pair of recurrences serves a ring pair.
//!
//! **Stages** (as in the scalar transform): with a⁺_ℓm = −(E_ℓm + i B_ℓm) and
//! a⁻_ℓm = −(−1)^s (E_ℓm − i B_ℓm), the ring sums
//! P_m(θ) = Σ_ℓ a⁺_ℓm ₛλ_ℓm(θ) and P̄_m(θ) = Σ_ℓ a⁻_ℓm ₋ₛλ_ℓm(θ) give Q_m = (P_m + P̄_m)/2 and
//! U_m = (P_m − P̄_m)/(2i), and each map is f(θ, φ_j) = Σ_m f_m(θ) e^{imφ_j} (real FFT per
//! ring). Analysis is the adjoint with equal pixel weights 4π/Npix: a^+_ℓm = Σ_rings ₛλ_ℓm
//! (G^Q_m + iG^U_m), a^−_ℓm = Σ_rings ₋ₛλ_ℓm (G^Q_m − iG^U_m), E = −(a⁺ + (−1)^s a⁻)/2,
//! B = i(a⁺ − (−1)^s a⁻)/2, with G_m = (4π/Npix) Σ_j f_j e^{−imφ_j}, refined by Jacobi iterations
//! like the scalar analysis.
//!
//! **Spin 2, orders m ≥ 2** (the shear and polarization case) skip the Wigner recurrence: the
//! Legendre stage is two scalar Legendre stages, to ℓmax + 2, of sin²θ (Q_m, U_m) (synthesis)
//! or of (G^Q_m, G^U_m)/sin²θ (analysis), run by the kernels of [`super::legendre`] (two-degree
//! recurrence in cos²θ, register sums, dead polar blocks skipped), with E, B coupled to the
//! scalar coefficients by the banded relations of [`SpinTwoCoupling`]. That is 2 + 4
//! multiply-adds per two degrees and field against the recurrence above's 4 + 8 per degree.
//! Orders m < 2, other spins and the polar rings (sin²θ < [`POLAR_SIN2`], where dividing by
//! sin²θ would amplify rounding) keep the recurrence above.
//!
//! The Legendre stage is parallel over orders m, the ring stage over
//! rings; each output is computed by one task in a fixed order, so results are bitwise
//! identical for any thread count.

use num_complex::Complex64;
use rayon::prelude::*;

use super::coefficients::HarmonicCoefficients;
use super::geometry::{Ring, RingGeometry};
use super::legendre::{
    analysis_order as scalar_analysis_order, log2_sectoral_norms, rescale,
    synthesis_order as scalar_synthesis_order, FusedMulAdd, MulAdd, OrderRecurrence, PlainMulAdd,
    RingPairs, SCALE_LOG2,
};
use super::transform::{HarmonicTransform, LegendreKernel, PhaseWalk};
use crate::error::{Error, Result};

/// Ring pairs per block in the synthesis kernel with AVX2 (eight accumulators and four
/// recurrence values per lane fit the 16 registers); twice as many with AVX-512.
const SYNTHESIS_LANES: usize = 4;
/// Ring pairs per block in the portable synthesis kernel (SSE2 registers hold two values).
const PORTABLE_SYNTHESIS_LANES: usize = 2;
/// Ring pairs per block in the analysis kernel (partial sums live in a buffer).
const ANALYSIS_LANES: usize = 8;
/// Rings per block of the scalar Legendre kernels ([`super::legendre`]) as the scalar transform
/// runs them: synthesis with AVX2 (twice as many with AVX-512, half in portable code); analysis
/// (all variants), whose lane products are summed in registers down to [`SCALAR_ANALYSIS_ROW`]
/// lanes per degree.
const SCALAR_SYNTHESIS_LANES: usize = 8;
const SCALAR_ANALYSIS_LANES: usize = 32;
const SCALAR_ANALYSIS_ROW: usize = 8;
/// Steps of the recurrence per tile in the analysis kernel: the partial sums of one tile
/// (TILE_STEPS rows of 4 × ANALYSIS_LANES values, 16 KB) stay in the first-level cache while
/// every block of ring pairs runs through it. A multiple of the steps between rescaling checks.
const TILE_STEPS: usize = 64;
/// Two-step passes between rescaling checks (growth over 8 steps stays far below 2^300).
const PASSES_PER_CHECK: usize = 4;
const _: () = assert!(TILE_STEPS.is_multiple_of(2 * PASSES_PER_CHECK));
/// Target size of one band of ring sums in the banded stages (as in the scalar transform).
const BAND_BYTES: usize = 4 << 20;
/// Spin-2 synthesis through sin²θ (Q, U) divides the rounding errors of the scalar sums by
/// sin²θ: against healpy 1.20.1 `alm2map_spin` at NSIDE 1024 (lmax 3071, random E and B), 7.7e-10
/// of the map rms on the first ring, falling as 1/sin²θ to the few 1e-12 of the Wigner recurrence
/// near sin²θ = 1e-3. Rings with sin²θ below this (40 per cap at NSIDE 1024) keep the Wigner
/// recurrence; worst error then 4e-11 of the rms (first ring, Wigner), 6e-14 away from the caps.
/// In analysis the same division raised the error to 3.3e-12 of the largest coefficient (the
/// Wigner recurrence: 3.8e-14); with the polar rings by the Wigner recurrence, 5.8e-14.
const POLAR_SIN2: f64 = 1e-3;
/// Rings per task when a band of synthesis ring sums is copied from order-major to ring-major.
const TRANSPOSE_RINGS: usize = 16;
/// Orders whose ring sums one task of the analysis gathers together from the ring-major band.
const ORDERS_PER_GATHER: usize = 8;
/// Most bands in analysis, which repeats the real FFTs of every ring per band.
const ANALYSIS_MAX_BANDS: usize = 3;

/// Runs the generic Legendre kernel `$kernel_fn` in the variant `$variant`
/// ([`LegendreKernel`]): with AVX-512F + FMA or AVX2 + FMA inside a function compiled with those
/// target features (the kernel is inlined into it and uses them), else as portable code; the
/// lanes give the ring pairs per block of each variant.
macro_rules! run_kernel {
    (
        $variant:expr,
        $kernel_fn:ident,
        lanes($avx512:expr, $avx2:expr, $portable:expr),
        ($($arg:ident: $ty:ty),* $(,)?)
    ) => {{
        /// # Safety
        /// The CPU must support AVX-512F and FMA.
        #[cfg(target_arch = "x86_64")]
        #[target_feature(enable = "avx512f,avx2,fma")]
        unsafe fn avx512($($arg: $ty),*) {
            $kernel_fn::<FusedMulAdd, { $avx512 }>($($arg),*)
        }
        /// # Safety
        /// The CPU must support AVX2 and FMA.
        #[cfg(target_arch = "x86_64")]
        #[target_feature(enable = "avx2,fma")]
        unsafe fn avx2($($arg: $ty),*) {
            $kernel_fn::<FusedMulAdd, { $avx2 }>($($arg),*)
        }
        match $variant {
            // SAFETY (both arms): the variant was chosen from the CPU's reported features.
            #[cfg(target_arch = "x86_64")]
            LegendreKernel::Avx512Fma => unsafe { avx512($($arg),*) },
            #[cfg(target_arch = "x86_64")]
            LegendreKernel::Avx2Fma => unsafe { avx2($($arg),*) },
            _ => $kernel_fn::<PlainMulAdd, { $portable }>($($arg),*),
        }
    }};
}

/// Spin-s synthesis and analysis for one (Nside, lmax, s); owns the ring geometry and the FFT
/// plans, is built once and shared (it is `Sync`).
pub struct SpinTransform {
    /// The scalar transform of the same (Nside, lmax): ring geometry, FFT plans, kernel.
    scalar: HarmonicTransform,
    spin: usize,
    pairs: HalfAngleRings,
    /// log2 √((2ℓ+1)/(4π) · (2ℓ−1)!!/(2ℓ)!!), ℓ = 0 … lmax.
    log2_norms: Vec<f64>,
    /// The north rings as the scalar Legendre kernels see them (spin 2, orders m ≥ 2).
    scalar_pairs: RingPairs,
    /// 1/sin²θ of the north rings.
    inverse_sin2: Vec<f64>,
    /// The north rings with sin²θ < [`POLAR_SIN2`] (the first ones), where the spin-2
    /// transforms keep the Wigner recurrence.
    polar_pairs: HalfAngleRings,
}

impl std::fmt::Debug for SpinTransform {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SpinTransform")
            .field("nside", &self.geometry().nside())
            .field("lmax", &self.lmax())
            .field("spin", &self.spin)
            .field("kernel", &self.scalar.kernel())
            .finish()
    }
}

/// North rings (z ≥ 0, pole first, the equator ring last) with what the starting values need:
/// cos θ and log2 of sin(θ/2), cos(θ/2).
struct HalfAngleRings {
    z: Vec<f64>,
    log2_sin_half: Vec<f64>,
    log2_cos_half: Vec<f64>,
}

impl HalfAngleRings {
    fn new(north: &[Ring]) -> Self {
        HalfAngleRings {
            z: north.iter().map(|r| r.z).collect(),
            // 1 − z = sin²θ/(1 + z) keeps the accuracy of sin θ near the pole.
            log2_sin_half: north
                .iter()
                .map(|r| 0.5 * (0.5 * r.sin_theta * r.sin_theta / (1.0 + r.z)).log2())
                .collect(),
            log2_cos_half: north
                .iter()
                .map(|r| 0.5 * (0.5 * (1.0 + r.z)).log2())
                .collect(),
        }
    }

    fn len(&self) -> usize {
        self.z.len()
    }
}

/// Recurrence coefficients and starting-value data for one order m (k = ℓ − ℓ0).
struct SpinOrder {
    m: usize,
    l0: usize,
    /// Steps k = 1 … n produce ℓ0 + k: μ_k = (a_k z ± b_k) μ_{k−1} − μ_{k−2}.
    a: Vec<f64>,
    b: Vec<f64>,
    /// c_ℓ: λ = c μ.
    c: Vec<f64>,
    /// log2 |start| = norm + a·log2 sin(θ/2) + b·log2 cos(θ/2), for spin +s and −s.
    start_plus: StartValue,
    start_minus: StartValue,
    /// (−1)^(ℓ0 + m): parity sign of k = 0.
    parity0: f64,
    /// (−1)^s.
    spin_sign: f64,
}

struct StartValue {
    log2_norm: f64,
    sin_power: f64,
    cos_power: f64,
    sign: f64,
}

impl SpinOrder {
    fn new(m: usize, spin: usize, lmax: usize, log2_norms: &[f64]) -> Self {
        let l0 = m.max(spin);
        let n = lmax - l0;
        let (mf, sf) = (m as f64, spin as f64);
        let mut a = vec![0.0; n + 1];
        let mut b = vec![0.0; n + 1];
        let mut c = vec![1.0; n + 1];
        // Raw A_ℓ, B_ℓ (= A_ℓ m s/(ℓ(ℓ+1))) and C_ℓ for ℓ = ℓ0 + k − 1.
        let coefficients = |l: f64| {
            let l1 = l + 1.0;
            let big_a = ((2.0 * l + 3.0) / (2.0 * l + 1.0)).sqrt() * l1 * (2.0 * l + 1.0)
                / (((l1 - mf) * (l1 + mf)) * ((l1 - sf) * (l1 + sf))).sqrt();
            // ℓ ≥ ℓ0 ≥ s ≥ 1.
            let big_b = big_a * mf * sf / (l * l1);
            let big_c = big_a
                * ((2.0 * l + 1.0) / (2.0 * l - 1.0)).sqrt()
                * (((l - mf) * (l + mf)) * ((l - sf) * (l + sf))).sqrt()
                / (l * (2.0 * l + 1.0));
            (big_a, big_b, big_c)
        };
        for k in 1..=n {
            let l = (l0 + k - 1) as f64;
            let (big_a, big_b, big_c) = coefficients(l);
            if k >= 2 {
                // c_{ℓ+1} = C_ℓ c_{ℓ−1}.
                c[k] = big_c * c[k - 2];
            }
            let ratio = c[k - 1] / c[k];
            a[k] = big_a * ratio;
            b[k] = big_b * ratio;
        }
        // √C(2ℓ0, ℓ0 + d) = √C(2ℓ0, ℓ0) √(Π_{j=1..|d|} (ℓ0 − j + 1)/(ℓ0 + j)), and
        // log2 √((2ℓ0+1)/(4π) C(2ℓ0, ℓ0)) = log2_norms[ℓ0] + ℓ0.
        let start = |sin_power: usize, cos_power: usize, sign: f64| {
            let d = sin_power.abs_diff(l0);
            let mut log2_ratio = 0.0;
            for j in 1..=d {
                log2_ratio += ((l0 - j + 1) as f64 / (l0 + j) as f64).log2();
            }
            StartValue {
                log2_norm: log2_norms[l0] + l0 as f64 + 0.5 * log2_ratio,
                sin_power: sin_power as f64,
                cos_power: cos_power as f64,
                sign,
            }
        };
        let odd = |x: usize| if x % 2 == 1 { -1.0 } else { 1.0 };
        let start_plus = start(m + spin, m.abs_diff(spin), odd(m));
        let start_minus = start(
            m.abs_diff(spin),
            m + spin,
            if m < spin { odd(spin) } else { odd(m) },
        );
        SpinOrder {
            m,
            l0,
            a,
            b,
            c,
            start_plus,
            start_minus,
            parity0: odd(l0 + m),
            spin_sign: odd(spin),
        }
    }

    fn steps(&self) -> usize {
        self.a.len() - 1
    }
}

/// Starting lanes of one recurrence (spin +s or −s) for a block of ring pairs: the values
/// v = ±2^(log2|λ| + 500 k), their scales k ≥ 0 (v carries 2^(−500 k)) and the live mask (1 where
/// k = 0).
#[inline(always)]
fn start_lanes<const L: usize>(
    start: &StartValue,
    rings: &HalfAngleRings,
    pairs: &[usize; L],
) -> ([f64; L], [i32; L], [f64; L]) {
    let mut value = [0.0; L];
    let mut scale = [0; L];
    let mut live = [0.0; L];
    for (r, &p) in pairs.iter().enumerate() {
        let log2 = start.log2_norm
            + start.sin_power * rings.log2_sin_half[p]
            + start.cos_power * rings.log2_cos_half[p];
        let k = if log2 >= -700.0 {
            0.0
        } else {
            ((-log2 - 200.0) / SCALE_LOG2).ceil()
        };
        scale[r] = k as i32;
        value[r] = start.sign * (log2 + SCALE_LOG2 * k).exp2();
        live[r] = if k == 0.0 { 1.0 } else { 0.0 };
    }
    (value, scale, live)
}

/// One recurrence step on all lanes: prev ← (a z + b) cur − prev.
#[inline(always)]
fn step<A: MulAdd, const L: usize>(
    a: f64,
    b: f64,
    z: &[f64; L],
    cur: &[f64; L],
    prev: &mut [f64; L],
) {
    for ((prev, cur), z) in prev.iter_mut().zip(cur).zip(z) {
        *prev = A::mul_add(A::mul_add(a, *z, b), *cur, -*prev);
    }
}

/// The lanes with the still-scaled ones zeroed.
#[inline(always)]
fn masked<const L: usize>(x: &[f64; L], live: &[f64; L]) -> [f64; L] {
    std::array::from_fn(|r| x[r] * live[r])
}

/// Pair indices of block `b` (blocks run from the equator towards the pole; padding lanes
/// repeat the last valid pair) and the number of valid lanes.
fn block_pairs<const L: usize>(b: usize, npairs: usize) -> Option<([usize; L], usize)> {
    let first = b * L;
    if first >= npairs {
        return None;
    }
    let valid = (npairs - first).min(L);
    let mut pairs = [0; L];
    for (r, p) in pairs.iter_mut().enumerate() {
        *p = npairs - 1 - (first + r.min(valid - 1));
    }
    Some((pairs, valid))
}

/// Synthesis coefficients of one order for each k, times c_ℓ: a⁺, a⁺ with the south parity
/// sign (−1)^(ℓ+m), a⁻, a⁻ with the parity sign, as (re, im) pairs.
fn synthesis_streams(order: &SpinOrder, e: &[Complex64], b: &[Complex64]) -> Vec<[f64; 8]> {
    let skip = order.l0 - order.m;
    let mut parity = order.parity0;
    (0..=order.steps())
        .map(|k| {
            let (ek, bk) = (e[skip + k], b[skip + k]);
            let c = order.c[k];
            // a⁺ = −(E + iB), a⁻ = −(−1)^s (E − iB).
            let plus = -Complex64::new(ek.re - bk.im, ek.im + bk.re) * c;
            let minus = -Complex64::new(ek.re + bk.im, ek.im - bk.re) * (c * order.spin_sign);
            let (ps, ms) = (plus * parity, minus * parity);
            parity = -parity;
            [
                plus.re, plus.im, ps.re, ps.im, minus.re, minus.im, ms.re, ms.im,
            ]
        })
        .collect()
}

/// North P += a⁺ ₛλ, south P += ±a⁺ ₋ₛλ, north P̄ += a⁻ ₋ₛλ, south P̄ += ±a⁻ ₛλ.
#[inline(always)]
fn accumulate<A: MulAdd, const L: usize>(
    sums: [&mut [f64; L]; 8],
    c: &[f64; 8],
    mu: &[f64; L],
    nu: &[f64; L],
) {
    for r in 0..L {
        sums[0][r] = A::mul_add(c[0], mu[r], sums[0][r]);
        sums[1][r] = A::mul_add(c[1], mu[r], sums[1][r]);
        sums[2][r] = A::mul_add(c[2], nu[r], sums[2][r]);
        sums[3][r] = A::mul_add(c[3], nu[r], sums[3][r]);
        sums[4][r] = A::mul_add(c[4], nu[r], sums[4][r]);
        sums[5][r] = A::mul_add(c[5], nu[r], sums[5][r]);
        sums[6][r] = A::mul_add(c[6], mu[r], sums[6][r]);
        sums[7][r] = A::mul_add(c[7], mu[r], sums[7][r]);
    }
}

/// Legendre stage of synthesis for one order m: for every ring pair p, Q_m and U_m of the
/// north ring (out[2p], out[stride + 2p]) and of the south ring (out[2p + 1],
/// out[stride + 2p + 1]), stride = 2 × pairs. `e`, `b` are the order's coefficients from
/// ℓ = m.
// Kept whole, as the scalar kernel: the phases of the lane recurrences (scaled lanes, all lanes
// live, the last odd step) share the block's lane registers in one inlined loop nest.
#[inline(always)]
fn synthesis_order<A: MulAdd, const L: usize>(
    order: &SpinOrder,
    rings: &HalfAngleRings,
    e: &[Complex64],
    b: &[Complex64],
    out: &mut [Complex64],
) {
    out.fill(Complex64::new(0.0, 0.0));
    let stride = out.len() / 2;
    let n = order.steps();
    let (a_k, b_k) = (&order.a, &order.b);
    let streams = synthesis_streams(order, e, b);
    let mut blk = 0;
    while let Some((pairs, valid)) = block_pairs::<L>(blk, rings.len()) {
        blk += 1;
        let z: [f64; L] = std::array::from_fn(|r| rings.z[pairs[r]]);
        let (mut mu1, mut smu, mut lmu) = start_lanes(&order.start_plus, rings, &pairs);
        let (mut nu1, mut snu, mut lnu) = start_lanes(&order.start_minus, rings, &pairs);
        let (mut mu0, mut nu0) = ([0.0f64; L], [0.0f64; L]);
        let [mut s0, mut s1, mut s2, mut s3, mut s4, mut s5, mut s6, mut s7] = [[0.0f64; L]; 8];
        // The eight lane sums as separate variables, so that they stay in registers.
        macro_rules! add {
            ($k:expr, $mu:expr, $nu:expr) => {
                accumulate::<A, L>(
                    [
                        &mut s0, &mut s1, &mut s2, &mut s3, &mut s4, &mut s5, &mut s6, &mut s7,
                    ],
                    &streams[$k],
                    $mu,
                    $nu,
                )
            };
        }
        add!(0, &masked(&mu1, &lmu), &masked(&nu1, &lnu));
        let mut k = 1;
        let mut scaled = smu.iter().chain(&snu).any(|&s| s > 0);
        while scaled && k < n {
            let mut pass = 0;
            while pass < PASSES_PER_CHECK && k < n {
                step::<A, L>(a_k[k], b_k[k], &z, &mu1, &mut mu0);
                step::<A, L>(a_k[k], -b_k[k], &z, &nu1, &mut nu0);
                add!(k, &masked(&mu0, &lmu), &masked(&nu0, &lnu));
                step::<A, L>(a_k[k + 1], b_k[k + 1], &z, &mu0, &mut mu1);
                step::<A, L>(a_k[k + 1], -b_k[k + 1], &z, &nu0, &mut nu1);
                add!(k + 1, &masked(&mu1, &lmu), &masked(&nu1, &lnu));
                k += 2;
                pass += 1;
            }
            let mu_scaled = rescale(&mut mu0, &mut mu1, &mut smu, &mut lmu);
            let nu_scaled = rescale(&mut nu0, &mut nu1, &mut snu, &mut lnu);
            scaled = mu_scaled || nu_scaled;
        }
        while k < n {
            step::<A, L>(a_k[k], b_k[k], &z, &mu1, &mut mu0);
            step::<A, L>(a_k[k], -b_k[k], &z, &nu1, &mut nu0);
            add!(k, &mu0, &nu0);
            step::<A, L>(a_k[k + 1], b_k[k + 1], &z, &mu0, &mut mu1);
            step::<A, L>(a_k[k + 1], -b_k[k + 1], &z, &nu0, &mut nu1);
            add!(k + 1, &mu1, &nu1);
            k += 2;
        }
        if k == n {
            step::<A, L>(a_k[k], b_k[k], &z, &mu1, &mut mu0);
            step::<A, L>(a_k[k], -b_k[k], &z, &nu1, &mut nu0);
            add!(k, &masked(&mu0, &lmu), &masked(&nu0, &lnu));
        }
        let sums = [s0, s1, s2, s3, s4, s5, s6, s7];
        for r in 0..valid {
            let p = pairs[r];
            let pn = Complex64::new(sums[0][r], sums[1][r]);
            let ps = Complex64::new(sums[2][r], sums[3][r]);
            let qn = Complex64::new(sums[4][r], sums[5][r]);
            let qs = Complex64::new(sums[6][r], sums[7][r]);
            let (qn_m, un_m) = q_u(pn, qn);
            let (qs_m, us_m) = q_u(ps, qs);
            out[2 * p] = qn_m;
            out[stride + 2 * p] = un_m;
            out[2 * p + 1] = qs_m;
            out[stride + 2 * p + 1] = us_m;
        }
        if (0..valid).all(|r| smu[r] > 0 && snu[r] > 0) {
            // Every ring nearer the pole is dead too (|ₛλ| grows away from the pole there).
            break;
        }
    }
}

/// Q_m = (P_m + P̄_m)/2 and U_m = (P_m − P̄_m)/(2i) from the ring sums of the two spins.
#[inline(always)]
fn q_u(p: Complex64, p_bar: Complex64) -> (Complex64, Complex64) {
    let d = (p - p_bar) * 0.5;
    ((p + p_bar) * 0.5, Complex64::new(d.im, -d.re))
}

/// Weighted azimuthal sums of one ring pair for one order: G^Q and G^U of the north and south
/// rings (the south ones zero for the equator ring, which is its own mirror).
#[derive(Clone, Copy)]
struct PairSums {
    q_north: Complex64,
    q_south: Complex64,
    u_north: Complex64,
    u_south: Complex64,
}

/// One row of the analysis partial sums: a⁺ += ₛλ X⁺_N + ₋ₛλ (±X⁺_S) and
/// a⁻ += ₋ₛλ X⁻_N + ₛλ (±X⁻_S), row = [a⁺ re | a⁺ im | a⁻ re | a⁻ im] lanes; `north` holds
/// X⁺_N, X⁻_N and `south` ±X⁺_S, ±X⁻_S as (re, im) lanes.
#[inline(always)]
fn add_row<A: MulAdd, const L: usize>(
    row: &mut [f64],
    mu: &[f64; L],
    nu: &[f64; L],
    north: &[[f64; L]; 4],
    south: &[[f64; L]; 4],
) {
    let row: &mut [f64] = &mut row[..4 * L];
    for r in 0..L {
        row[r] = A::mul_add(mu[r], north[0][r], A::mul_add(nu[r], south[0][r], row[r]));
        row[L + r] = A::mul_add(
            mu[r],
            north[1][r],
            A::mul_add(nu[r], south[1][r], row[L + r]),
        );
        row[2 * L + r] = A::mul_add(
            nu[r],
            north[2][r],
            A::mul_add(mu[r], south[2][r], row[2 * L + r]),
        );
        row[3 * L + r] = A::mul_add(
            nu[r],
            north[3][r],
            A::mul_add(mu[r], south[3][r], row[3 * L + r]),
        );
    }
}

/// Lane state of one block of ring pairs in the Legendre stage of analysis, carried from one
/// tile of steps to the next.
struct AnalysisBlock<const L: usize> {
    z: [f64; L],
    /// X⁺_N, X⁻_N as (re, im) lanes.
    north: [[f64; L]; 4],
    /// X⁺_S, X⁻_S times the parity sign of even k (padding lanes zero).
    even: [[f64; L]; 4],
    /// ₛλ at the last two steps (k − 2, k − 1), with their scales and live masks.
    mu: ([f64; L], [f64; L]),
    smu: [i32; L],
    lmu: [f64; L],
    /// ₋ₛλ likewise.
    nu: ([f64; L], [f64; L]),
    snu: [i32; L],
    lnu: [f64; L],
    /// Whether any lane is still scaled.
    scaled: bool,
    /// Next step.
    k: usize,
}

/// Opens the block of ring pairs `pairs`: its inputs and starting lanes; adds the k = 0 row to
/// `row0`; then runs the recurrences without sums while every lane is still scaled (those
/// terms are zero). `None` when every lane stays scaled up to ℓmax: the block adds nothing, and
/// nor does any block nearer the pole (|ₛλ| grows away from the pole there).
#[inline(always)]
fn open_analysis_block<A: MulAdd, const L: usize>(
    order: &SpinOrder,
    rings: &HalfAngleRings,
    ring_sums: &dyn Fn(usize) -> PairSums,
    (pairs, valid): ([usize; L], usize),
    row0: &mut [f64],
) -> Option<AnalysisBlock<L>> {
    let n = order.steps();
    let (a_k, b_k) = (&order.a, &order.b);
    let z: [f64; L] = std::array::from_fn(|r| rings.z[pairs[r]]);
    let (mut mu1, mut smu, mut lmu) = start_lanes(&order.start_plus, rings, &pairs);
    let (mut nu1, mut snu, mut lnu) = start_lanes(&order.start_minus, rings, &pairs);
    let (mut mu0, mut nu0) = ([0.0f64; L], [0.0f64; L]);
    let live = |lmu: &[f64; L], lnu: &[f64; L]| lmu.iter().chain(lnu).any(|&x| x > 0.0);
    let mut k = 1;
    let mut scaled = smu.iter().chain(&snu).any(|&s| s > 0);
    while !live(&lmu, &lnu) && k < n {
        let mut pass = 0;
        while pass < PASSES_PER_CHECK && k < n {
            step::<A, L>(a_k[k], b_k[k], &z, &mu1, &mut mu0);
            step::<A, L>(a_k[k], -b_k[k], &z, &nu1, &mut nu0);
            step::<A, L>(a_k[k + 1], b_k[k + 1], &z, &mu0, &mut mu1);
            step::<A, L>(a_k[k + 1], -b_k[k + 1], &z, &nu0, &mut nu1);
            k += 2;
            pass += 1;
        }
        let mu_scaled = rescale(&mut mu0, &mut mu1, &mut smu, &mut lmu);
        let nu_scaled = rescale(&mut nu0, &mut nu1, &mut snu, &mut lnu);
        scaled = mu_scaled || nu_scaled;
    }
    if !live(&lmu, &lnu) {
        return None;
    }
    let mut north = [[0.0f64; L]; 4];
    let mut even = [[0.0f64; L]; 4];
    for r in 0..valid {
        let s = ring_sums(pairs[r]);
        let i = Complex64::new(0.0, 1.0);
        let (pn, ps) = (s.q_north + i * s.u_north, s.q_south + i * s.u_south);
        let (mn, ms) = (s.q_north - i * s.u_north, s.q_south - i * s.u_south);
        north[0][r] = pn.re;
        north[1][r] = pn.im;
        north[2][r] = mn.re;
        north[3][r] = mn.im;
        let sign = order.parity0;
        even[0][r] = sign * ps.re;
        even[1][r] = sign * ps.im;
        even[2][r] = sign * ms.re;
        even[3][r] = sign * ms.im;
    }
    if k == 1 {
        add_row::<A, L>(
            row0,
            &masked(&mu1, &lmu),
            &masked(&nu1, &lnu),
            &north,
            &even,
        );
    }
    Some(AnalysisBlock {
        z,
        north,
        even,
        mu: (mu0, mu1),
        smu,
        lmu,
        nu: (nu0, nu1),
        snu,
        lnu,
        scaled,
        k,
    })
}

/// Runs an open block through the steps k < `t1` of the tile starting at `t0` (and the last
/// odd step when the tile ends at ℓmax), adding its terms to the tile's rows `acc` (row k − t0).
// Kept whole, as the scalar kernel: the phases of the lane recurrences (scaled lanes, all lanes
// live, the last odd step) share the block's lane registers in one inlined loop nest.
#[inline(always)]
fn run_analysis_tile<A: MulAdd, const L: usize>(
    order: &SpinOrder,
    blk: &mut AnalysisBlock<L>,
    t0: usize,
    t1: usize,
    acc: &mut [f64],
) {
    let n = order.steps();
    let end = t1.min(n);
    let (a_k, b_k) = (&order.a, &order.b);
    let w = 4 * L;
    let (z, north, even) = (blk.z, blk.north, blk.even);
    let odd: [[f64; L]; 4] = std::array::from_fn(|j| std::array::from_fn(|r| -even[j][r]));
    let ((mut mu0, mut mu1), (mut nu0, mut nu1)) = (blk.mu, blk.nu);
    let (mut smu, mut snu, mut lmu, mut lnu) = (blk.smu, blk.snu, blk.lmu, blk.lnu);
    let mut scaled = blk.scaled;
    let mut k = blk.k;
    let row = |k: usize| (k - t0) * w;
    while scaled && k < end {
        let mut pass = 0;
        while pass < PASSES_PER_CHECK && k < end {
            step::<A, L>(a_k[k], b_k[k], &z, &mu1, &mut mu0);
            step::<A, L>(a_k[k], -b_k[k], &z, &nu1, &mut nu0);
            add_row::<A, L>(
                &mut acc[row(k)..],
                &masked(&mu0, &lmu),
                &masked(&nu0, &lnu),
                &north,
                &odd,
            );
            step::<A, L>(a_k[k + 1], b_k[k + 1], &z, &mu0, &mut mu1);
            step::<A, L>(a_k[k + 1], -b_k[k + 1], &z, &nu0, &mut nu1);
            add_row::<A, L>(
                &mut acc[row(k + 1)..],
                &masked(&mu1, &lmu),
                &masked(&nu1, &lnu),
                &north,
                &even,
            );
            k += 2;
            pass += 1;
        }
        let mu_scaled = rescale(&mut mu0, &mut mu1, &mut smu, &mut lmu);
        let nu_scaled = rescale(&mut nu0, &mut nu1, &mut snu, &mut lnu);
        scaled = mu_scaled || nu_scaled;
    }
    while k < end {
        step::<A, L>(a_k[k], b_k[k], &z, &mu1, &mut mu0);
        step::<A, L>(a_k[k], -b_k[k], &z, &nu1, &mut nu0);
        add_row::<A, L>(&mut acc[row(k)..], &mu0, &nu0, &north, &odd);
        step::<A, L>(a_k[k + 1], b_k[k + 1], &z, &mu0, &mut mu1);
        step::<A, L>(a_k[k + 1], -b_k[k + 1], &z, &nu0, &mut nu1);
        add_row::<A, L>(&mut acc[row(k + 1)..], &mu1, &nu1, &north, &even);
        k += 2;
    }
    if k == n && t1 > n {
        step::<A, L>(a_k[k], b_k[k], &z, &mu1, &mut mu0);
        step::<A, L>(a_k[k], -b_k[k], &z, &nu1, &mut nu0);
        add_row::<A, L>(
            &mut acc[row(k)..],
            &masked(&mu0, &lmu),
            &masked(&nu0, &lnu),
            &north,
            &odd,
        );
        k += 1;
    }
    (blk.mu, blk.nu) = ((mu0, mu1), (nu0, nu1));
    (blk.smu, blk.snu, blk.lmu, blk.lnu) = (smu, snu, lmu, lnu);
    blk.scaled = scaled;
    blk.k = k;
}

/// Legendre stage of analysis for one order m: a⁺_ℓm = Σ_pairs [ₛλ X⁺_N + (−1)^(ℓ+m) ₋ₛλ X⁺_S]
/// and a⁻_ℓm = Σ_pairs [₋ₛλ X⁻_N + (−1)^(ℓ+m) ₛλ X⁻_S] with X± = G^Q ± i G^U, then
/// E = −(a⁺ + (−1)^s a⁻)/2 and B = i(a⁺ − (−1)^s a⁻)/2 into `e`, `b` (the order's coefficients
/// from ℓ = m; those below ℓ0 are set to zero).
///
/// The steps run in tiles of [`TILE_STEPS`]: every block of ring pairs (equator first) runs
/// through one tile, adding its lanes' products into per-lane partial sums (a row of 4L values
/// per ℓ, the tile's rows small enough to stay in the first-level cache), before any block
/// starts the next tile. Each lane of a row receives the blocks in the same order whatever the
/// tiling, and the lanes are summed once at the end in a fixed order, so the result does not
/// depend on scheduling.
#[inline(always)]
fn analysis_order<A: MulAdd, const L: usize>(
    order: &SpinOrder,
    rings: &HalfAngleRings,
    ring_sums: &dyn Fn(usize) -> PairSums,
    e: &mut [Complex64],
    b: &mut [Complex64],
) {
    let n = order.steps();
    let skip = order.l0 - order.m;
    let w = 4 * L;
    let mut row0 = vec![0.0f64; w];
    let mut blocks = Vec::with_capacity(rings.len().div_ceil(L));
    let mut index = 0;
    while let Some(block) = block_pairs::<L>(index, rings.len()) {
        index += 1;
        match open_analysis_block::<A, L>(order, rings, ring_sums, block, &mut row0) {
            Some(open) => blocks.push(open),
            None => break,
        }
    }
    e[..skip].fill(Complex64::new(0.0, 0.0));
    b[..skip].fill(Complex64::new(0.0, 0.0));
    let lane_sum = |v: &[f64]| v.iter().fold(0.0, |s, x| s + x);
    let mut write = |k: usize, row: &[f64]| {
        let plus = Complex64::new(lane_sum(&row[..L]), lane_sum(&row[L..2 * L]));
        let minus =
            Complex64::new(lane_sum(&row[2 * L..3 * L]), lane_sum(&row[3 * L..])) * order.spin_sign;
        let c = order.c[k];
        e[skip + k] = -(plus + minus) * (0.5 * c);
        let d = (plus - minus) * (0.5 * c);
        b[skip + k] = Complex64::new(-d.im, d.re);
    };
    write(0, &row0);
    let mut acc = vec![0.0f64; TILE_STEPS * w];
    for t0 in (1..=n).step_by(TILE_STEPS) {
        let t1 = (t0 + TILE_STEPS).min(n + 1);
        let acc = &mut acc[..(t1 - t0) * w];
        acc.fill(0.0);
        for blk in blocks.iter_mut().filter(|blk| blk.k < t1) {
            run_analysis_tile::<A, L>(order, blk, t0, t1, acc);
        }
        for (i, row) in acc.chunks_exact(w).enumerate() {
            write(t0 + i, row);
        }
    }
}

/// Spin-2 harmonics from the scalar ones, for one order m ≥ 2: sin²θ ₊₂λ_ℓm and sin²θ ₋₂λ_ℓm
/// are combinations of the five scalar λ_ℓ'm, ℓ' = ℓ − 2 … ℓ + 2, with constant coefficients,
/// so a spin-2 transform is two scalar transforms (up to ℓmax + 2) of the fields
/// sin²θ (Q, U) (synthesis) or (Q, U)/sin²θ (analysis), with these couplings applied to the
/// coefficients.
///
/// From ₛY_ℓm with the spin-raising and -lowering operators, ₊₂λ = D₊λ/√((ℓ−1)ℓ(ℓ+1)(ℓ+2)),
/// D± = (∂θ ∓ m/sinθ − cotθ)(∂θ ∓ m/sinθ) (Newman & Penrose 1966, J. Math. Phys. 7, 863;
/// Goldberg et al. 1967), the Legendre equation for λ'' and
/// sinθ ∂θλ_ℓ = ℓ z λ_ℓ − (2ℓ+1) ε_ℓ λ_ℓ−1 (z = cosθ, ε_ℓ = √((ℓ² − m²)/(4ℓ² − 1))):
///
/// sin²θ ·±2λ_ℓ = n_ℓ [ℓ(ℓ−1) z² λ_ℓ + 2(2ℓ+1) ε_ℓ z λ_ℓ−1 + (2m² − ℓ(ℓ+1)) λ_ℓ
/// ∓ 2m ((ℓ−1) z λ_ℓ − (2ℓ+1) ε_ℓ λ_ℓ−1)], n_ℓ = 1/√((ℓ−1)ℓ(ℓ+1)(ℓ+2)),
///
/// the form of the W_ℓm, X_ℓm functions of CMB polarization built from P_ℓm and P_ℓ−1,m
/// (Kamionkowski, Kosowsky & Stebbins 1997, PRD 55, 7368; Zaldarriaga & Seljak 1997, PRD 55,
/// 1830). With z λ_k = ε_k+1 λ_k+1 + ε_k λ_k−1 this is n_ℓ Σ_d (G_ℓ,ℓ+d ± H_ℓ,ℓ+d) λ_ℓ+d:
///
/// * G_ℓ,ℓ−2 = (ℓ+1)(ℓ+2) ε_ℓ ε_ℓ−1, G_ℓ,ℓ = ℓ(ℓ−1)(ε²_ℓ+1 + ε²_ℓ) + 2(2ℓ+1) ε²_ℓ + 2m² − ℓ(ℓ+1),
///   G_ℓ,ℓ+2 = ℓ(ℓ−1) ε_ℓ+1 ε_ℓ+2;
/// * H_ℓ,ℓ−1 = 2m(ℓ+2) ε_ℓ, H_ℓ,ℓ+1 = −2m(ℓ−1) ε_ℓ+1
///
/// (checked against the explicit sum of Goldberg et al. and against healpy in
/// tests/spin_harmonics_against_healpy.rs). With the stages' relations (module documentation),
/// Q_m = −Σ_ℓ n_ℓ (E_ℓ G_ℓ + i B_ℓ H_ℓ)(θ) and U_m = −Σ_ℓ n_ℓ (B_ℓ G_ℓ − i E_ℓ H_ℓ)(θ), where
/// G_ℓ(θ) = Σ_d G_ℓ,ℓ+d λ_ℓ+d/sin²θ (H likewise), and the analysis is the adjoint. For m < 2
/// the division by sin²θ loses accuracy near the poles (₂λ_ℓm ∝ sin^|m−2| θ while λ_ℓm does not
/// vanish as fast), so those two orders keep the Wigner recurrence.
struct SpinTwoCoupling {
    /// n_ℓ (G_ℓ,ℓ−2, G_ℓ,ℓ, G_ℓ,ℓ+2) for ℓ = m … lmax.
    even: Vec<[f64; 3]>,
    /// n_ℓ (H_ℓ,ℓ−1, H_ℓ,ℓ+1) for ℓ = m … lmax.
    odd: Vec<[f64; 2]>,
}

impl SpinTwoCoupling {
    fn new(m: usize, lmax: usize) -> Self {
        debug_assert!(m >= 2);
        let mf = m as f64;
        let eps = |k: usize| {
            if k <= m {
                0.0
            } else {
                let k = k as f64;
                ((k - mf) * (k + mf) / (4.0 * k * k - 1.0)).sqrt()
            }
        };
        let (mut even, mut odd) = (Vec::with_capacity(lmax + 1 - m), Vec::new());
        odd.reserve(lmax + 1 - m);
        for l in m..=lmax {
            let lf = l as f64;
            let n = 1.0 / ((lf - 1.0) * lf * (lf + 1.0) * (lf + 2.0)).sqrt();
            let (e_m1, e0, e1, e2) = (eps(l - 1), eps(l), eps(l + 1), eps(l + 2));
            even.push([
                n * (lf + 1.0) * (lf + 2.0) * e0 * e_m1,
                n * (lf * (lf - 1.0) * (e1 * e1 + e0 * e0)
                    + 2.0 * (2.0 * lf + 1.0) * e0 * e0
                    + 2.0 * mf * mf
                    - lf * (lf + 1.0)),
                n * lf * (lf - 1.0) * e1 * e2,
            ]);
            odd.push([
                n * 2.0 * mf * (lf + 2.0) * e0,
                -n * 2.0 * mf * (lf - 1.0) * e1,
            ]);
        }
        SpinTwoCoupling { even, odd }
    }

    /// Synthesis: the coefficients (ℓ' = m … lmax + 2) of the scalar fields sin²θ Q and
    /// sin²θ U from E, B (ℓ = m … lmax): X^Q_ℓ' = −Σ_ℓ n_ℓ (G_ℓ,ℓ' E_ℓ + i H_ℓ,ℓ' B_ℓ),
    /// X^U_ℓ' = −Σ_ℓ n_ℓ (G_ℓ,ℓ' B_ℓ − i H_ℓ,ℓ' E_ℓ).
    fn scalar_coefficients(
        &self,
        e: &[Complex64],
        b: &[Complex64],
    ) -> (Vec<Complex64>, Vec<Complex64>) {
        let zero = Complex64::new(0.0, 0.0);
        let mut xq = vec![zero; e.len() + 2];
        let mut xu = vec![zero; e.len() + 2];
        for (k, ((&ek, &bk), (g, h))) in e
            .iter()
            .zip(b)
            .zip(self.even.iter().zip(&self.odd))
            .enumerate()
        {
            let (ie, ib) = (Complex64::new(-ek.im, ek.re), Complex64::new(-bk.im, bk.re));
            // G_ℓ,ℓ−2 and H_ℓ,ℓ−1 are zero where ℓ − 2, ℓ − 1 < m.
            if k >= 2 {
                xq[k - 2] -= ek * g[0];
                xu[k - 2] -= bk * g[0];
            }
            if k >= 1 {
                xq[k - 1] -= ib * h[0];
                xu[k - 1] += ie * h[0];
            }
            xq[k] -= ek * g[1];
            xu[k] -= bk * g[1];
            xq[k + 1] -= ib * h[1];
            xu[k + 1] += ie * h[1];
            xq[k + 2] -= ek * g[2];
            xu[k + 2] -= bk * g[2];
        }
        (xq, xu)
    }

    /// Analysis: E, B (ℓ = m … lmax) from the scalar sums S^Q_ℓ', S^U_ℓ' (ℓ' = m … lmax + 2) of
    /// the fields Q/sin²θ and U/sin²θ: E_ℓ = −n_ℓ Σ_ℓ' (G_ℓ,ℓ' S^Q_ℓ' + i H_ℓ,ℓ' S^U_ℓ'),
    /// B_ℓ = −n_ℓ Σ_ℓ' (G_ℓ,ℓ' S^U_ℓ' − i H_ℓ,ℓ' S^Q_ℓ').
    fn spin_coefficients(
        &self,
        sq: &[Complex64],
        su: &[Complex64],
        e: &mut [Complex64],
        b: &mut [Complex64],
    ) {
        let zero = Complex64::new(0.0, 0.0);
        let below = |s: &[Complex64], k: usize, d: usize| if k >= d { s[k - d] } else { zero };
        for (k, (g, h)) in self.even.iter().zip(&self.odd).enumerate() {
            let gq = sq[k] * g[1] + sq[k + 2] * g[2] + below(sq, k, 2) * g[0];
            let gu = su[k] * g[1] + su[k + 2] * g[2] + below(su, k, 2) * g[0];
            let hq = sq[k + 1] * h[1] + below(sq, k, 1) * h[0];
            let hu = su[k + 1] * h[1] + below(su, k, 1) * h[0];
            e[k] = -(gq + Complex64::new(-hu.im, hu.re));
            b[k] = -(gu - Complex64::new(-hq.im, hq.re));
        }
    }
}

/// Legendre stage of analysis of one scalar field at the scalar transform's block sizes.
#[inline(always)]
fn scalar_analysis<A: MulAdd, const L: usize>(
    rec: &OrderRecurrence,
    log2_norm: f64,
    pairs: &RingPairs,
    ring_sums: &[Complex64],
    out: &mut [Complex64],
    rows: &mut Vec<ScalarAnalysisRow>,
) {
    scalar_analysis_order::<A, L, SCALAR_ANALYSIS_ROW>(
        rec, log2_norm, pairs, ring_sums, out, false, rows,
    )
}

/// One degree's partial sums in the scalar analysis kernel (its scratch, reused between calls).
type ScalarAnalysisRow = [[f64; SCALAR_ANALYSIS_ROW]; 4];

impl SpinTransform {
    /// Transform for spin `spin` ≥ 1, maps of `nside` and coefficients up to `lmax`, with
    /// `spin` ≤ lmax ≤ 3·nside − 1.
    pub fn new(nside: usize, lmax: usize, spin: usize) -> Result<Self> {
        Self::with_kernel(nside, lmax, spin, LegendreKernel::best_available())
    }

    /// As [`SpinTransform::new`] with a chosen kernel variant (an error if this CPU cannot run
    /// it). All variants agree to rounding; each is bitwise reproducible for any thread count.
    pub fn with_kernel(
        nside: usize,
        lmax: usize,
        spin: usize,
        kernel: LegendreKernel,
    ) -> Result<Self> {
        // The scalar transform checks the kernel, NSIDE and lmax, and owns the ring geometry
        // and the FFT plans of the rings, which the spin transform shares.
        let scalar = HarmonicTransform::with_kernel(nside, lmax, kernel)?;
        if spin == 0 || spin > lmax {
            return Err(Error::Setting(format!(
                "spin {spin} must be between 1 and lmax = {lmax}"
            )));
        }
        let north = &scalar.geometry().rings()[..2 * nside];
        let pairs = HalfAngleRings::new(north);
        // The polar rings where the spin-2 synthesis through sin²θ (Q, U) would lose accuracy.
        let polar = north
            .iter()
            .take_while(|r| r.sin_theta * r.sin_theta < POLAR_SIN2)
            .count();
        let polar_pairs = HalfAngleRings::new(&north[..polar]);
        let scalar_pairs = RingPairs::new(
            north.iter().map(|r| r.z).collect(),
            north.iter().map(|r| r.sin_theta).collect(),
        );
        let inverse_sin2 = north
            .iter()
            .map(|r| 1.0 / (r.sin_theta * r.sin_theta))
            .collect();
        Ok(SpinTransform {
            spin,
            pairs,
            log2_norms: log2_sectoral_norms(lmax),
            scalar_pairs,
            inverse_sin2,
            polar_pairs,
            scalar,
        })
    }

    /// The scalar transform of the same grid and lmax (whose ring geometry and FFT plans this
    /// transform uses).
    pub fn scalar(&self) -> &HarmonicTransform {
        &self.scalar
    }

    /// HEALPix resolution parameter.
    pub fn nside(&self) -> usize {
        self.scalar.nside()
    }

    /// Largest multipole.
    pub fn lmax(&self) -> usize {
        self.scalar.lmax()
    }

    /// The spin weight s.
    pub fn spin(&self) -> usize {
        self.spin
    }

    /// Number of map pixels, 12 Nside².
    pub fn pixel_count(&self) -> usize {
        self.scalar.pixel_count()
    }

    fn ring_count(&self) -> usize {
        self.scalar.ring_count()
    }

    fn geometry(&self) -> &RingGeometry {
        self.scalar.geometry()
    }

    /// Orders per band: one band's ring sums near [`BAND_BYTES`], at most `max_bands` bands.
    fn orders_per_band(&self, max_bands: usize) -> usize {
        let per_order = 2 * self.ring_count() * std::mem::size_of::<Complex64>();
        (BAND_BYTES / per_order)
            .max(1)
            .max((self.lmax() + 1).div_ceil(max_bands))
    }

    fn check_coefficients(&self, alm: &HarmonicCoefficients, name: &str) -> Result<()> {
        if alm.lmax() != self.lmax() {
            return Err(Error::Mismatch(format!(
                "{name} coefficients have lmax {}, the transform was built for lmax {}",
                alm.lmax(),
                self.lmax()
            )));
        }
        Ok(())
    }

    fn check_map(&self, map: &[f64], name: &str) -> Result<()> {
        if map.len() != self.pixel_count() {
            return Err(Error::Mismatch(format!(
                "{name} map has {} pixels, NSIDE {} needs {}",
                map.len(),
                self.nside(),
                self.pixel_count()
            )));
        }
        if let Some(p) = map.iter().position(|v| !v.is_finite()) {
            return Err(Error::Data(format!(
                "{name} map value at pixel {p} is not finite ({})",
                map[p]
            )));
        }
        Ok(())
    }

    /// The two real maps (RING order) Q = Re P, U = Im P of the spin-s field
    /// P = −Σ_ℓm (E_ℓm + i B_ℓm) ₛY_ℓm (healpy 1.20.1 `alm2map_spin([e, b], nside, spin,
    /// lmax)`). Both coefficient sets must have the transform's lmax; ℓ < s is ignored.
    ///
    /// # Examples
    ///
    /// E_20 = 1 alone: Q = −₂Y_20 = −√(15/(32π)) sin²θ and U = 0 (₂Y_20 from the explicit sum
    /// of Goldberg et al. 1967 at ℓ = 2, m = 0, s = 2: √(5/(4π)·C(4, 2)) sin²(θ/2) cos²(θ/2)).
    /// ```
    /// use num_complex::Complex64;
    /// use planisphere::harmonics::{HarmonicCoefficients, RingGeometry, SpinTransform};
    ///
    /// let t = SpinTransform::new(1, 2, 2).unwrap();
    /// let mut e = HarmonicCoefficients::zeros(2);
    /// e.set(2, 0, Complex64::new(1.0, 0.0));
    /// let (q, u) = t.synthesis(&e, &HarmonicCoefficients::zeros(2)).unwrap();
    /// let norm = (15.0 / (32.0 * std::f64::consts::PI)).sqrt();
    /// for (p, (theta, _)) in RingGeometry::new(1).unwrap().pixel_centres().iter().enumerate() {
    ///     assert!((q[p] + norm * theta.sin().powi(2)).abs() < 1e-15);
    ///     assert!(u[p].abs() < 1e-15);
    /// }
    /// ```
    pub fn synthesis(
        &self,
        e: &HarmonicCoefficients,
        b: &HarmonicCoefficients,
    ) -> Result<(Vec<f64>, Vec<f64>)> {
        self.check_coefficients(e, "E")?;
        self.check_coefficients(b, "B")?;
        Ok(self.two_map_synthesis(|m, out| self.synthesis_order(m, e.order(m), b.order(m), out)))
    }

    /// The two real maps (RING order) f = Σ_ℓm f_ℓm Y_ℓm and g = Σ_ℓm g_ℓm Y_ℓm of two real
    /// scalar fields (healpy 1.20.1 `alm2map` of each) in one pass: the scalar Legendre kernel
    /// once per field, then one ring stage for both maps. Both coefficient sets must have the
    /// transform's lmax.
    ///
    /// # Examples
    ///
    /// f = Y_00 (f_00 = 1) is the constant 1/√(4π); g_10 = 1 gives g = Y_10 = √(3/(4π)) cos θ
    /// (closed forms from memory, standard).
    /// ```
    /// use num_complex::Complex64;
    /// use planisphere::harmonics::{HarmonicCoefficients, RingGeometry, SpinTransform};
    ///
    /// let t = SpinTransform::new(2, 5, 2).unwrap();
    /// let (mut f, mut g) = (HarmonicCoefficients::zeros(5), HarmonicCoefficients::zeros(5));
    /// f.set(0, 0, Complex64::new(1.0, 0.0));
    /// g.set(1, 0, Complex64::new(1.0, 0.0));
    /// let (f_map, g_map) = t.scalar_pair_synthesis(&f, &g).unwrap();
    /// let pi4 = 4.0 * std::f64::consts::PI;
    /// for (p, (theta, _)) in RingGeometry::new(2).unwrap().pixel_centres().iter().enumerate() {
    ///     assert!((f_map[p] - 1.0 / pi4.sqrt()).abs() < 1e-15);
    ///     assert!((g_map[p] - (3.0 / pi4).sqrt() * theta.cos()).abs() < 1e-15);
    /// }
    /// ```
    pub fn scalar_pair_synthesis(
        &self,
        f: &HarmonicCoefficients,
        g: &HarmonicCoefficients,
    ) -> Result<(Vec<f64>, Vec<f64>)> {
        self.check_coefficients(f, "first field's")?;
        self.check_coefficients(g, "second field's")?;
        Ok(self.two_map_synthesis(|m, out| self.scalar_pair_order(m, f.order(m), g.order(m), out)))
    }

    /// Ring stage of synthesis for two real maps, from the Legendre stage `order_sums(m, out)`
    /// that writes order m's ring sums of both maps (layout of [`synthesis_order`]).
    fn two_map_synthesis(
        &self,
        order_sums: impl Fn(usize, &mut [Complex64]) + Sync,
    ) -> (Vec<f64>, Vec<f64>) {
        let lmax = self.lmax();
        let stride = 2 * self.pairs.len();
        let band = self.orders_per_band(usize::MAX);
        let mut q_map = vec![0.0; self.pixel_count()];
        let mut u_map = vec![0.0; self.pixel_count()];
        // Each ring's half spectrum is accumulated in place in its slice of each map, packed
        // as [Re X_0, Re X_{n/2}, Re X_1, Im X_1, …].
        let mut ring_slices = Vec::with_capacity(self.ring_count());
        let (mut rest_q, mut rest_u): (&mut [f64], &mut [f64]) = (&mut q_map, &mut u_map);
        for ring in self.geometry().rings() {
            let (head_q, tail_q) = rest_q.split_at_mut(ring.pixel_count);
            let (head_u, tail_u) = rest_u.split_at_mut(ring.pixel_count);
            ring_slices.push((head_q, head_u));
            rest_q = tail_q;
            rest_u = tail_u;
        }
        let mut sums = vec![Complex64::new(0.0, 0.0); band.min(lmax + 1) * 2 * stride];
        let mut by_ring =
            vec![[Complex64::new(0.0, 0.0); 2]; band.min(lmax + 1) * self.ring_count()];
        for m0 in (0..=lmax).step_by(band) {
            let m1 = (m0 + band).min(lmax + 1);
            let width = m1 - m0;
            let sums = &mut sums[..width * 2 * stride];
            sums.par_chunks_mut(2 * stride)
                .enumerate()
                .for_each(|(i, out)| {
                    order_sums(m0 + i, out);
                });
            // The band copied to ring-major ([ring][order] = (Q, U) sums), so that each ring
            // reads its orders contiguously.
            let sums = &*sums;
            let by_ring = &mut by_ring[..width * self.ring_count()];
            by_ring
                .par_chunks_mut(width * TRANSPOSE_RINGS)
                .enumerate()
                .for_each(|(c, out)| {
                    let q0 = c * TRANSPOSE_RINGS;
                    let count = out.len() / width;
                    for i in 0..width {
                        let order = &sums[i * 2 * stride..(i + 1) * 2 * stride];
                        for t in 0..count {
                            let slot = self.scalar.slot(q0 + t);
                            out[t * width + i] = [order[slot], order[stride + slot]];
                        }
                    }
                });
            let by_ring = &*by_ring;
            ring_slices
                .par_iter_mut()
                .enumerate()
                .for_each(|(q, (values_q, values_u))| {
                    let ring = &self.geometry().rings()[q];
                    let n = ring.pixel_count;
                    let mut phases = PhaseWalk::new(ring.phi0);
                    for (m, &[mut fq, mut fu]) in (m0..m1).zip(&by_ring[q * width..(q + 1) * width])
                    {
                        if ring.half_pixel_shift {
                            let phase = phases.at(m % n);
                            let sign = if (m / n) % 2 == 1 { -1.0 } else { 1.0 };
                            fq *= phase * sign;
                            fu *= phase * sign;
                        }
                        fold_order(values_q, m, fq);
                        fold_order(values_u, m, fu);
                    }
                });
        }
        drop((sums, by_ring));
        ring_slices
            .into_par_iter()
            .for_each(|(values_q, values_u)| {
                let plan = self.scalar.inverse_plan(values_q.len());
                let mut spectrum = plan.make_input_vec();
                let mut scratch = plan.make_scratch_vec();
                for values in [values_q, values_u] {
                    unpack_half_spectrum(values, &mut spectrum);
                    plan.process_with_scratch(&mut spectrum, values, &mut scratch)
                        .expect("FFT buffers sized from the plan");
                }
            });
        (q_map, u_map)
    }

    /// E and B coefficients up to lmax of the spin-s field with real maps `q`, `u` (RING
    /// order), with `iterations` Jacobi refinements (healpy 1.20.1 `map2alm_spin([q, u], spin,
    /// lmax, mmax=lmax)` is 0 iterations; each iteration adds the analysis of the residual
    /// map, as the scalar analysis does). Coefficients with ℓ < s are zero.
    pub fn analysis(
        &self,
        q: &[f64],
        u: &[f64],
        iterations: usize,
    ) -> Result<(HarmonicCoefficients, HarmonicCoefficients)> {
        self.check_map(q, "Q")?;
        self.check_map(u, "U")?;
        let (mut e, mut b) = self.analysis_once(q, u);
        for _ in 0..iterations {
            let (rq, ru) = self.synthesis(&e, &b)?;
            let residual_q: Vec<f64> = q.iter().zip(&rq).map(|(a, b)| a - b).collect();
            let residual_u: Vec<f64> = u.iter().zip(&ru).map(|(a, b)| a - b).collect();
            let (ce, cb) = self.analysis_once(&residual_q, &residual_u);
            for (a, c) in e.as_mut_slice().iter_mut().zip(ce.as_slice()) {
                *a += *c;
            }
            for (a, c) in b.as_mut_slice().iter_mut().zip(cb.as_slice()) {
                *a += *c;
            }
        }
        Ok((e, b))
    }

    /// One quadrature pass (the adjoint of synthesis times 4π/Npix).
    fn analysis_once(&self, q: &[f64], u: &[f64]) -> (HarmonicCoefficients, HarmonicCoefficients) {
        let lmax = self.lmax();
        let weight = 4.0 * std::f64::consts::PI / self.pixel_count() as f64;
        let rings = self.geometry().rings();
        let mut e = HarmonicCoefficients::zeros(lmax);
        let mut b = HarmonicCoefficients::zeros(lmax);
        let mut order_slices = Vec::with_capacity(lmax + 1);
        let (mut rest_e, mut rest_b): (&mut [Complex64], &mut [Complex64]) =
            (e.as_mut_slice(), b.as_mut_slice());
        for m in 0..=lmax {
            let (head_e, tail_e) = rest_e.split_at_mut(lmax + 1 - m);
            let (head_b, tail_b) = rest_b.split_at_mut(lmax + 1 - m);
            order_slices.push(Some((head_e, head_b)));
            rest_e = tail_e;
            rest_b = tail_b;
        }
        let band = self.orders_per_band(ANALYSIS_MAX_BANDS);
        let npairs = self.pairs.len();
        // Weighted azimuthal sums of every ring for one band of orders, ring-major:
        // [G^Q of the band | G^U of the band] per ring.
        let mut sums = vec![Complex64::new(0.0, 0.0); self.ring_count() * 2 * band.min(lmax + 1)];
        for m0 in (0..=lmax).step_by(band) {
            let m1 = (m0 + band).min(lmax + 1);
            let width = m1 - m0;
            let sums = &mut sums[..self.ring_count() * 2 * width];
            sums.par_chunks_mut(2 * width)
                .enumerate()
                .for_each(|(r, out)| {
                    let ring = &rings[r];
                    let n = ring.pixel_count;
                    let plan = self.scalar.forward_plan(n);
                    let mut spectrum = plan.make_output_vec();
                    let mut scratch = plan.make_scratch_vec();
                    let (out_q, out_u) = out.split_at_mut(width);
                    for (map, out) in [(q, out_q), (u, out_u)] {
                        let mut values = map[ring.first_pixel..ring.first_pixel + n].to_vec();
                        plan.process_with_scratch(&mut values, &mut spectrum, &mut scratch)
                            .expect("FFT buffers sized from the plan");
                        let mut phases = PhaseWalk::new(ring.phi0);
                        for (o, m) in out.iter_mut().zip(m0..m1) {
                            let k = m % n;
                            let mut g = if k <= n / 2 {
                                spectrum[k]
                            } else {
                                spectrum[n - k].conj()
                            };
                            if ring.half_pixel_shift {
                                g *= phases.at(k).conj();
                                if (m / n) % 2 == 1 {
                                    g = -g;
                                }
                            }
                            *o = g * weight;
                        }
                    }
                });
            let sums = &*sums;
            let ring_count = self.ring_count();
            order_slices[m0..m1]
                .par_chunks_mut(ORDERS_PER_GATHER)
                .enumerate()
                .for_each(|(j, group)| {
                    // The group's ring sums, order-major in Legendre-stage slots (2p north,
                    // 2p + 1 south of pair p; G^Q then G^U), gathered ring by ring from the
                    // ring-major band (neighbouring orders share cache lines there). The
                    // south slot of the equator ring, its own mirror, stays 0.
                    let i0 = j * ORDERS_PER_GATHER;
                    let stride = 2 * npairs;
                    let mut slots = vec![Complex64::new(0.0, 0.0); group.len() * 2 * stride];
                    for ring in 0..ring_count {
                        let row = &sums[ring * 2 * width..(ring + 1) * 2 * width];
                        let slot = self.scalar.slot(ring);
                        for o in 0..group.len() {
                            slots[o * 2 * stride + slot] = row[i0 + o];
                            slots[o * 2 * stride + stride + slot] = row[width + i0 + o];
                        }
                    }
                    for ((o, out), ring_sums) in group
                        .iter_mut()
                        .enumerate()
                        .zip(slots.chunks_exact_mut(2 * stride))
                    {
                        let m = m0 + i0 + o;
                        let (out_e, out_b) = out.take().expect("each order is visited once");
                        self.analysis_order(m, ring_sums, out_e, out_b);
                    }
                });
        }
        (e, b)
    }

    fn synthesis_order(&self, m: usize, e: &[Complex64], b: &[Complex64], out: &mut [Complex64]) {
        if m.max(self.spin) > self.lmax() {
            out.fill(Complex64::new(0.0, 0.0));
            return;
        }
        if self.spin == 2 && m >= 2 {
            return self.spin_two_synthesis_order(m, e, b, out);
        }
        self.wigner_synthesis(m, &self.pairs, e, b, out);
    }

    /// Ring sums of order m by the Wigner recurrence on `rings` (layout of
    /// [`Self::synthesis_order`] for those rings).
    fn wigner_synthesis(
        &self,
        m: usize,
        rings: &HalfAngleRings,
        e: &[Complex64],
        b: &[Complex64],
        out: &mut [Complex64],
    ) {
        let order = &SpinOrder::new(m, self.spin, self.lmax(), &self.log2_norms);
        run_kernel!(
            self.scalar.kernel(),
            synthesis_order,
            lanes(2 * SYNTHESIS_LANES, SYNTHESIS_LANES, PORTABLE_SYNTHESIS_LANES),
            (
                order: &SpinOrder,
                rings: &HalfAngleRings,
                e: &[Complex64],
                b: &[Complex64],
                out: &mut [Complex64],
            )
        )
    }

    /// Both fields' ring sums of order m (layout of [`Self::synthesis_order`]) by the scalar
    /// Legendre kernel, once per field.
    fn scalar_pair_order(&self, m: usize, f: &[Complex64], g: &[Complex64], out: &mut [Complex64]) {
        let rec = OrderRecurrence::new(m, self.lmax());
        let (out_f, out_g) = out.split_at_mut(out.len() / 2);
        self.scalar_synthesis(&rec, f, out_f);
        self.scalar_synthesis(&rec, g, out_g);
    }

    /// Ring sums Σ_ℓ a_ℓm λ_ℓm of one scalar field for the orders' recurrence `rec` (slots
    /// 2p north, 2p + 1 south of pair p).
    fn scalar_synthesis(&self, rec: &OrderRecurrence, alm: &[Complex64], out: &mut [Complex64]) {
        let (norm, pairs) = (self.log2_norms[rec.m], &self.scalar_pairs);
        run_kernel!(
            self.scalar.kernel(),
            scalar_synthesis_order,
            lanes(2 * SCALAR_SYNTHESIS_LANES, SCALAR_SYNTHESIS_LANES, SCALAR_SYNTHESIS_LANES / 2),
            (
                rec: &OrderRecurrence,
                norm: f64,
                pairs: &RingPairs,
                alm: &[Complex64],
                out: &mut [Complex64],
            )
        )
    }

    /// Sums Σ_rings λ_ℓm G of one scalar field's ring sums G (slot layout as above) for
    /// ℓ = m … the recurrence's lmax.
    fn scalar_analysis(
        &self,
        rec: &OrderRecurrence,
        ring_sums: &[Complex64],
        out: &mut [Complex64],
        rows: &mut Vec<ScalarAnalysisRow>,
    ) {
        let (norm, pairs) = (self.log2_norms[rec.m], &self.scalar_pairs);
        run_kernel!(
            self.scalar.kernel(),
            scalar_analysis,
            lanes(SCALAR_ANALYSIS_LANES, SCALAR_ANALYSIS_LANES, SCALAR_ANALYSIS_LANES),
            (
                rec: &OrderRecurrence,
                norm: f64,
                pairs: &RingPairs,
                ring_sums: &[Complex64],
                out: &mut [Complex64],
                rows: &mut Vec<ScalarAnalysisRow>,
            )
        )
    }

    /// Spin-2 synthesis of order m ≥ 2 by two scalar syntheses ([`SpinTwoCoupling`]).
    fn spin_two_synthesis_order(
        &self,
        m: usize,
        e: &[Complex64],
        b: &[Complex64],
        out: &mut [Complex64],
    ) {
        let (xq, xu) = SpinTwoCoupling::new(m, self.lmax()).scalar_coefficients(e, b);
        let rec = OrderRecurrence::new(m, self.lmax() + 2);
        let (out_q, out_u) = out.split_at_mut(out.len() / 2);
        self.scalar_synthesis(&rec, &xq, out_q);
        self.scalar_synthesis(&rec, &xu, out_u);
        self.divide_by_sin2(out);
        let polar = 2 * self.polar_pairs.len();
        if polar > 0 {
            let mut sums = vec![Complex64::new(0.0, 0.0); 2 * polar];
            self.wigner_synthesis(m, &self.polar_pairs, e, b, &mut sums);
            let stride = out.len() / 2;
            out[..polar].copy_from_slice(&sums[..polar]);
            out[stride..stride + polar].copy_from_slice(&sums[polar..]);
        }
    }

    /// Ring sums of Legendre-stage slots (any number of fields, each 2 × pairs long) divided by
    /// sin²θ of their ring.
    fn divide_by_sin2(&self, slots: &mut [Complex64]) {
        for sums in slots.chunks_exact_mut(2 * self.pairs.len()) {
            for (pair, &w) in sums.chunks_exact_mut(2).zip(&self.inverse_sin2) {
                pair[0] *= w;
                pair[1] *= w;
            }
        }
    }

    /// Legendre stage of analysis for order m from its ring sums (slot layout, G^Q then G^U;
    /// consumed).
    fn analysis_order(
        &self,
        m: usize,
        slots: &mut [Complex64],
        e: &mut [Complex64],
        b: &mut [Complex64],
    ) {
        if m.max(self.spin) > self.lmax() {
            e.fill(Complex64::new(0.0, 0.0));
            b.fill(Complex64::new(0.0, 0.0));
            return;
        }
        if self.spin == 2 && m >= 2 {
            return self.spin_two_analysis_order(m, slots, e, b);
        }
        self.wigner_analysis(m, &self.pairs, slots, e, b);
    }

    /// Spin-2 analysis of order m ≥ 2: two scalar analyses of the ring sums divided by sin²θ
    /// ([`SpinTwoCoupling`]), the polar rings' terms (sin²θ < [`POLAR_SIN2`]) by the Wigner
    /// recurrence instead, added after.
    fn spin_two_analysis_order(
        &self,
        m: usize,
        slots: &mut [Complex64],
        e: &mut [Complex64],
        b: &mut [Complex64],
    ) {
        let zero = Complex64::new(0.0, 0.0);
        let stride = slots.len() / 2;
        let polar = 2 * self.polar_pairs.len();
        let mut polar_slots = vec![zero; 2 * polar];
        for (field, out) in polar_slots.chunks_exact_mut(polar.max(1)).enumerate() {
            let sums = &mut slots[field * stride..field * stride + polar];
            out.copy_from_slice(sums);
            sums.fill(zero);
        }
        self.divide_by_sin2(slots);
        let rec = OrderRecurrence::new(m, self.lmax() + 2);
        let mut sq = vec![zero; self.lmax() + 3 - m];
        let mut su = sq.clone();
        let mut rows = Vec::new();
        self.scalar_analysis(&rec, &slots[..stride], &mut sq, &mut rows);
        self.scalar_analysis(&rec, &slots[stride..], &mut su, &mut rows);
        SpinTwoCoupling::new(m, self.lmax()).spin_coefficients(&sq, &su, e, b);
        if polar > 0 {
            let (mut polar_e, mut polar_b) = (vec![zero; e.len()], vec![zero; b.len()]);
            self.wigner_analysis(
                m,
                &self.polar_pairs,
                &polar_slots,
                &mut polar_e,
                &mut polar_b,
            );
            for (x, y) in e.iter_mut().zip(&polar_e).chain(b.iter_mut().zip(&polar_b)) {
                *x += y;
            }
        }
    }

    /// E, B of order m by the Wigner recurrence from the ring sums of `rings` (slot layout,
    /// G^Q then G^U).
    fn wigner_analysis(
        &self,
        m: usize,
        rings: &HalfAngleRings,
        slots: &[Complex64],
        e: &mut [Complex64],
        b: &mut [Complex64],
    ) {
        let stride = slots.len() / 2;
        let ring_sums = &|p: usize| PairSums {
            q_north: slots[2 * p],
            q_south: slots[2 * p + 1],
            u_north: slots[stride + 2 * p],
            u_south: slots[stride + 2 * p + 1],
        };
        let order = &SpinOrder::new(m, self.spin, self.lmax(), &self.log2_norms);
        run_kernel!(
            self.scalar.kernel(),
            analysis_order,
            lanes(ANALYSIS_LANES, ANALYSIS_LANES, ANALYSIS_LANES),
            (
                order: &SpinOrder,
                rings: &HalfAngleRings,
                ring_sums: &dyn Fn(usize) -> PairSums,
                e: &mut [Complex64],
                b: &mut [Complex64],
            )
        )
    }
}

/// Adds order m's ring sum g (already phase-shifted) to a ring's packed half spectrum
/// [Re X_0, Re X_{n/2}, Re X_1, Im X_1, …]: on n pixels, e^{imφ_j} folds onto frequency
/// k = m mod n, and its conjugate (order −m of a real map) onto n − k.
fn fold_order(values: &mut [f64], m: usize, g: Complex64) {
    let n = values.len();
    let half = n / 2;
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
    let k = m % n;
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

/// The Hermitian half spectrum (DC and Nyquist bins real; n is always even) from its packed
/// form.
fn unpack_half_spectrum(values: &[f64], spectrum: &mut [Complex64]) {
    let half = values.len() / 2;
    spectrum[0] = Complex64::new(values[0], 0.0);
    spectrum[half] = Complex64::new(values[1], 0.0);
    for (k, x) in spectrum.iter_mut().enumerate().take(half).skip(1) {
        *x = Complex64::new(values[2 * k], values[2 * k + 1]);
    }
}
