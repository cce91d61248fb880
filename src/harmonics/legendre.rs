//! Normalised associated Legendre functions λ_ℓm(θ) = Y_ℓm(θ, 0), evaluated on the fly, order by
//! order, for blocks of rings at once, inside the Legendre stages of synthesis and analysis.
//!
//! Recurrence for fully normalised functions (Holmes & Featherstone 2002, J. Geodesy 76, 279,
//! §2, the standard "forward column" recursion; written here for the 1/√(4π) normalisation of
//! Y_ℓm, Condon–Shortley phase included; checked against scipy 1.17.1 `sph_harm_y` and healpy
//! 1.20.1 in the tests):
//!
//! * λ_mm = (−1)^m √((2m + 1)/(4π) · (2m − 1)!!/(2m)!!) sin^m θ,
//! * λ_{m+1,m} = √(2m + 3) cos θ λ_mm,
//! * λ_ℓm = α_ℓm cos θ λ_{ℓ−1,m} − γ_ℓm λ_{ℓ−2,m}, with
//!   α_ℓm = √((4ℓ² − 1)/(ℓ² − m²)) and γ_ℓm = α_ℓm √(((ℓ − 1)² − m²)/(4(ℓ − 1)² − 1)).
//!
//! sin^m θ underflows for large m near the poles. Following the scaled-recursion idea of Holmes
//! & Featherstone (2002), λ_mm is started from its logarithm as v·2^(−500 s) with an integer
//! scale s ≥ 0; the recurrence runs on v (it is linear) and, checked every 8 steps, v is brought
//! back by 2^−500 whenever it exceeds 2^200, until s = 0. While s > 0 the true value is below
//! about 2^−240 (growth over 8 steps stays below 2^60) and the term is left out of the sums. A ring whose λ_ℓm stays scaled up to ℓmax is "dead" for that m;
//! since |λ_ℓm(θ)| grows monotonically with θ from the pole up to its first extremum, every ring
//! nearer the pole is dead too, which lets the stages stop early.
//!
//! North/south symmetry: λ_ℓm(π − θ) = (−1)^(ℓ+m) λ_ℓm(θ), so one recurrence serves a ring pair
//! by summing even and odd ℓ − m separately.

use num_complex::Complex64;

/// Rescaling: values carry a factor 2^(−SCALE_LOG2 · s).
pub(crate) const SCALE_LOG2: f64 = 500.0;
/// Scaled values above this are brought down by 2^−500.
const SCALE_LIMIT: f64 = 1.606_938_044_258_990_3e60; // 2^200 (exact: checked in a unit test)
/// 2^−500.
const SCALE_DOWN: f64 = 3.054_936_363_499_605e-151;
/// Number of two-step passes between rescaling checks (growth per check stays far below 2^800).
const PASSES_PER_CHECK: usize = 4;

/// Multiply-add, plain (a·b + c, two roundings) or fused (one rounding, hardware FMA).
pub(crate) trait MulAdd {
    fn mul_add(a: f64, b: f64, c: f64) -> f64;
}

/// a·b + c with two roundings (portable).
pub(crate) struct PlainMulAdd;
impl MulAdd for PlainMulAdd {
    #[inline(always)]
    fn mul_add(a: f64, b: f64, c: f64) -> f64 {
        a * b + c
    }
}

/// Fused a·b + c; only used inside functions compiled with the `fma` target feature.
pub(crate) struct FusedMulAdd;
impl MulAdd for FusedMulAdd {
    #[inline(always)]
    fn mul_add(a: f64, b: f64, c: f64) -> f64 {
        a.mul_add(b, c)
    }
}

/// log2 of √((2m + 1)/(4π) · (2m − 1)!!/(2m)!!) for m = 0 … mmax, by a running sum of
/// log2((2k − 1)/(2k)).
pub(crate) fn log2_sectoral_norms(mmax: usize) -> Vec<f64> {
    let mut out = Vec::with_capacity(mmax + 1);
    let mut acc = 0.0f64;
    for m in 0..=mmax {
        if m > 0 {
            acc += ((2 * m - 1) as f64 / (2 * m) as f64).log2();
        }
        out.push(0.5 * (((2 * m + 1) as f64) / (4.0 * std::f64::consts::PI)).log2() + 0.5 * acc);
    }
    out
}

/// Recurrence coefficients for one order m, indexed by k = ℓ − m.
///
/// The three-term recurrence is run on rescaled values μ_ℓ = λ_ℓm / c_ℓ with c_m = c_{m+1} = 1
/// and c_ℓ = γ_ℓm c_{ℓ−2}, which turns it into μ_ℓ = A_ℓ cos θ μ_{ℓ−1} − μ_{ℓ−2} with
/// A_ℓ = α_ℓm c_{ℓ−1}/c_ℓ (one multiplication fewer per step); c_ℓ is applied to the
/// coefficients instead. c_ℓ stays within a few powers of ℓ^{±1/2}.
pub(crate) struct OrderRecurrence {
    pub m: usize,
    pub lmax: usize,
    /// A_ℓ, k ≥ 1.
    a: Vec<f64>,
    /// c_ℓ, k ≥ 0.
    pub c: Vec<f64>,
}

impl OrderRecurrence {
    pub fn new(m: usize, lmax: usize) -> Self {
        let n = lmax - m;
        let mut a = vec![0.0; n + 1];
        let mut c = vec![1.0; n + 1];
        let mf = m as f64;
        if n >= 1 {
            // α_{m+1,m} = √(2m + 3), γ_{m+1,m} = 0.
            a[1] = (2.0 * mf + 3.0).sqrt();
        }
        for k in 2..=n {
            let l = (m + k) as f64;
            let alpha = ((4.0 * l * l - 1.0) / ((l - mf) * (l + mf))).sqrt();
            let lm1 = l - 1.0;
            let gamma = alpha * (((lm1 - mf) * (lm1 + mf)) / (4.0 * lm1 * lm1 - 1.0)).sqrt();
            c[k] = gamma * c[k - 2];
            a[k] = alpha * c[k - 1] / c[k];
        }
        OrderRecurrence { m, lmax, a, c }
    }
}

/// Ring pairs seen by the Legendre stages: pair p has its north ring at z[p] ≥ 0, p = 0 nearest
/// the north pole; the last pair is the equator ring when it is its own mirror.
pub(crate) struct RingPairs {
    pub z: Vec<f64>,
    pub sin_theta: Vec<f64>,
}

impl RingPairs {
    pub fn len(&self) -> usize {
        self.z.len()
    }
}

/// Lane values for one block of ring pairs.
struct Block<const L: usize> {
    /// Pair index of each lane (padding lanes repeat the last valid pair).
    pairs: [usize; L],
    valid: usize,
    z: [f64; L],
    v: [f64; L],
    s: [i32; L],
}

/// Blocks of L pairs from the equator towards the pole: block b holds pairs
/// npairs − 1 − (bL + r).
fn block<const L: usize>(
    b: usize,
    pairs: &RingPairs,
    m: usize,
    log2_norm: f64,
) -> Option<Block<L>> {
    let npairs = pairs.len();
    let first = b * L;
    if first >= npairs {
        return None;
    }
    let valid = (npairs - first).min(L);
    let sign = if m % 2 == 1 { -1.0 } else { 1.0 };
    let mut blk = Block {
        pairs: [0; L],
        valid,
        z: [0.0; L],
        v: [0.0; L],
        s: [0; L],
    };
    for r in 0..L {
        let p = npairs - 1 - (first + r.min(valid - 1));
        blk.pairs[r] = p;
        blk.z[r] = pairs.z[p];
        let log2 = log2_norm + m as f64 * pairs.sin_theta[p].log2();
        let s = if log2 >= -700.0 {
            0.0
        } else {
            ((-log2 - 200.0) / SCALE_LOG2).ceil()
        };
        blk.s[r] = s as i32;
        blk.v[r] = sign * (log2 + SCALE_LOG2 * s).exp2();
    }
    Some(blk)
}

/// Bring lanes with s > 0 back by 2^−500 when they exceed 2^200; returns whether any lane is
/// still scaled.
#[inline(always)]
pub(crate) fn rescale<const L: usize>(
    p0: &mut [f64; L],
    p1: &mut [f64; L],
    s: &mut [i32; L],
    live: &mut [f64; L],
) -> bool {
    let mut scaled = false;
    for r in 0..L {
        if s[r] > 0 {
            if p1[r].abs() > SCALE_LIMIT {
                p0[r] *= SCALE_DOWN;
                p1[r] *= SCALE_DOWN;
                s[r] -= 1;
                if s[r] == 0 {
                    live[r] = 1.0;
                }
            }
            if s[r] > 0 {
                scaled = true;
            }
        }
    }
    scaled
}

/// 1 for the lanes already at their true scale (s = 0), 0 for those still scaled down.
#[inline(always)]
fn live_lanes<const L: usize>(s: &[i32; L]) -> [f64; L] {
    let mut live = [0.0f64; L];
    for r in 0..L {
        live[r] = if s[r] == 0 { 1.0 } else { 0.0 };
    }
    live
}

/// One recurrence step on all lanes: new = A z cur − prev, stored over `prev`.
#[inline(always)]
fn step<A: MulAdd, const L: usize>(a: f64, z: &[f64; L], cur: &[f64; L], prev: &mut [f64; L]) {
    for r in 0..L {
        prev[r] = A::mul_add(a * z[r], cur[r], -prev[r]);
    }
}

/// Legendre stage of synthesis for one order m: for every ring pair, the north and south
/// ring sums F_m = Σ_ℓ a_ℓm λ_ℓm(±z), written as out[2p] (north) and out[2p + 1] (south).
// Kept whole (about 90 lines): the three phases of the lane recurrence (scaled lanes, all
// lanes live, the last odd term) share the block's lane registers in one inlined loop nest, the
// innermost loop of the harmonic transforms.
#[inline(always)]
pub(crate) fn synthesis_order<A: MulAdd, const L: usize>(
    rec: &OrderRecurrence,
    log2_norm: f64,
    pairs: &RingPairs,
    alm: &[Complex64],
    out: &mut [Complex64],
) {
    out.fill(Complex64::new(0.0, 0.0));
    let m = rec.m;
    let n = rec.lmax - m;
    let coef = &rec.a;
    // Coefficients times c_ℓ (the recurrence runs on λ/c).
    let alm: Vec<Complex64> = alm.iter().zip(&rec.c).map(|(a, c)| a * c).collect();
    let mut b = 0;
    while let Some(blk) = block::<L>(b, pairs, m, log2_norm) {
        b += 1;
        let z = blk.z;
        let mut s = blk.s;
        let mut p1 = blk.v;
        let mut p0 = [0.0f64; L];
        let mut live = live_lanes(&s);
        let (mut er, mut ei, mut or, mut oi) = ([0.0f64; L], [0.0f64; L], [0.0f64; L], [0.0f64; L]);
        let c = alm[0];
        for r in 0..L {
            er[r] = c.re * p1[r] * live[r];
            ei[r] = c.im * p1[r] * live[r];
        }
        let mut k = 1;
        let mut scaled = s.iter().any(|&x| x > 0);
        while scaled && k < n {
            let mut pass = 0;
            while pass < PASSES_PER_CHECK && k < n {
                step::<A, L>(coef[k], &z, &p1, &mut p0);
                let c = alm[k];
                for r in 0..L {
                    let p = p0[r] * live[r];
                    or[r] = A::mul_add(c.re, p, or[r]);
                    oi[r] = A::mul_add(c.im, p, oi[r]);
                }
                step::<A, L>(coef[k + 1], &z, &p0, &mut p1);
                let c = alm[k + 1];
                for r in 0..L {
                    let p = p1[r] * live[r];
                    er[r] = A::mul_add(c.re, p, er[r]);
                    ei[r] = A::mul_add(c.im, p, ei[r]);
                }
                k += 2;
                pass += 1;
            }
            scaled = rescale(&mut p0, &mut p1, &mut s, &mut live);
        }
        while k < n {
            step::<A, L>(coef[k], &z, &p1, &mut p0);
            let c = alm[k];
            for r in 0..L {
                or[r] = A::mul_add(c.re, p0[r], or[r]);
                oi[r] = A::mul_add(c.im, p0[r], oi[r]);
            }
            step::<A, L>(coef[k + 1], &z, &p0, &mut p1);
            let c = alm[k + 1];
            for r in 0..L {
                er[r] = A::mul_add(c.re, p1[r], er[r]);
                ei[r] = A::mul_add(c.im, p1[r], ei[r]);
            }
            k += 2;
        }
        if k == n {
            step::<A, L>(coef[k], &z, &p1, &mut p0);
            let c = alm[k];
            for r in 0..L {
                let p = p0[r] * live[r];
                or[r] = A::mul_add(c.re, p, or[r]);
                oi[r] = A::mul_add(c.im, p, oi[r]);
            }
        }
        for r in 0..blk.valid {
            let p = blk.pairs[r];
            out[2 * p] = Complex64::new(er[r] + or[r], ei[r] + oi[r]);
            out[2 * p + 1] = Complex64::new(er[r] - or[r], ei[r] - oi[r]);
        }
        if s[..blk.valid].iter().all(|&x| x > 0) {
            // Whole block dead: every ring nearer the pole is dead too.
            break;
        }
    }
}

/// Legendre stage of analysis for one order m: out[ℓ − m] = Σ_pairs λ_ℓm(z) X, with
/// X = G_north + G_south for even ℓ − m and G_north − G_south for odd ℓ − m, where `ring_sums`
/// gives (G_north, G_south) of every pair (the weighted azimuthal sums of the map).
///
/// Each block adds its lanes' products into per-lane partial sums `acc` (one row of 2L values
/// per ℓ); the lanes are summed once at the end in a fixed pairwise order, so the result does
/// not depend on scheduling.
// Kept whole (about 100 lines): the three phases of the lane recurrence (scaled lanes, all
// lanes live, the last odd term) share the block's lane registers in one inlined loop nest, the
// innermost loop of the harmonic transforms.
#[inline(always)]
pub(crate) fn analysis_order<A: MulAdd, const L: usize>(
    rec: &OrderRecurrence,
    log2_norm: f64,
    pairs: &RingPairs,
    ring_sums: &dyn Fn(usize) -> (Complex64, Complex64),
    out: &mut [Complex64],
) {
    let m = rec.m;
    let n = rec.lmax - m;
    let coef = &rec.a;
    let mut acc = vec![0.0f64; (n + 1) * 2 * L];
    // acc row k: [re lanes | im lanes].
    #[inline(always)]
    fn add_row<A: MulAdd, const L: usize>(
        row: &mut [f64],
        p: &[f64; L],
        xr: &[f64; L],
        xi: &[f64; L],
    ) {
        let (re, im) = row.split_at_mut(L);
        for r in 0..L {
            re[r] = A::mul_add(p[r], xr[r], re[r]);
            im[r] = A::mul_add(p[r], xi[r], im[r]);
        }
    }
    let mut b = 0;
    while let Some(blk) = block::<L>(b, pairs, m, log2_norm) {
        b += 1;
        let z = blk.z;
        let mut s = blk.s;
        let mut p1 = blk.v;
        let mut p0 = [0.0f64; L];
        let (mut xer, mut xei, mut xor, mut xoi) =
            ([0.0f64; L], [0.0f64; L], [0.0f64; L], [0.0f64; L]);
        for r in 0..blk.valid {
            let (g_n, g_s) = ring_sums(blk.pairs[r]);
            xer[r] = g_n.re + g_s.re;
            xei[r] = g_n.im + g_s.im;
            xor[r] = g_n.re - g_s.re;
            xoi[r] = g_n.im - g_s.im;
        }
        let mut live = live_lanes(&s);
        let mask = |live: &[f64; L], x: &[f64; L]| {
            let mut y = [0.0f64; L];
            for r in 0..L {
                y[r] = x[r] * live[r];
            }
            y
        };
        let (mut mer, mut mei, mut mor, mut moi) = (
            mask(&live, &xer),
            mask(&live, &xei),
            mask(&live, &xor),
            mask(&live, &xoi),
        );
        let w = 2 * L;
        add_row::<A, L>(&mut acc[..w], &p1, &mer, &mei);
        let mut k = 1;
        let mut scaled = s.iter().any(|&x| x > 0);
        while scaled && k < n {
            let mut pass = 0;
            while pass < PASSES_PER_CHECK && k < n {
                step::<A, L>(coef[k], &z, &p1, &mut p0);
                add_row::<A, L>(&mut acc[k * w..(k + 1) * w], &p0, &mor, &moi);
                step::<A, L>(coef[k + 1], &z, &p0, &mut p1);
                add_row::<A, L>(&mut acc[(k + 1) * w..(k + 2) * w], &p1, &mer, &mei);
                k += 2;
                pass += 1;
            }
            scaled = rescale(&mut p0, &mut p1, &mut s, &mut live);
            mer = mask(&live, &xer);
            mei = mask(&live, &xei);
            mor = mask(&live, &xor);
            moi = mask(&live, &xoi);
        }
        while k < n {
            step::<A, L>(coef[k], &z, &p1, &mut p0);
            add_row::<A, L>(&mut acc[k * w..(k + 1) * w], &p0, &mor, &moi);
            step::<A, L>(coef[k + 1], &z, &p0, &mut p1);
            add_row::<A, L>(&mut acc[(k + 1) * w..(k + 2) * w], &p1, &mer, &mei);
            k += 2;
        }
        if k == n {
            step::<A, L>(coef[k], &z, &p1, &mut p0);
            add_row::<A, L>(&mut acc[k * w..(k + 1) * w], &p0, &mor, &moi);
        }
        if s[..blk.valid].iter().all(|&x| x > 0) {
            break;
        }
    }
    for (k, o) in out.iter_mut().enumerate() {
        let row = &acc[k * 2 * L..(k + 1) * 2 * L];
        *o = Complex64::new(pairwise_sum::<L>(&row[..L]), pairwise_sum::<L>(&row[L..])) * rec.c[k];
    }
}

/// Σ of L values in a fixed pairwise order.
#[inline(always)]
fn pairwise_sum<const L: usize>(v: &[f64]) -> f64 {
    let mut t = [0.0f64; L];
    t.copy_from_slice(v);
    let mut width = L;
    while width > 1 {
        let half = width / 2;
        for r in 0..half {
            t[r] += t[r + half];
        }
        width = half;
    }
    t[0]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_constants_are_exact_powers_of_two() {
        assert_eq!(SCALE_LIMIT, 2f64.powi(200));
        assert_eq!(SCALE_DOWN, 2f64.powi(-500));
        assert_eq!(SCALE_LOG2, 500.0);
    }

    // Closed forms (from memory, standard): Y_20(θ,0) = √(5/16π)(3cos²θ − 1),
    // Y_21(θ,0) = −√(15/8π) sinθ cosθ, Y_22(θ,0) = √(15/32π) sin²θ.
    #[test]
    fn recurrence_reproduces_low_order_closed_forms() {
        use std::f64::consts::PI;
        let theta: f64 = 0.7;
        let (st, ct) = theta.sin_cos();
        let pairs = RingPairs {
            z: vec![ct],
            sin_theta: vec![st],
        };
        let lmax = 2;
        let norms = log2_sectoral_norms(lmax);
        let expect = [
            (5.0 / (16.0 * PI)).sqrt() * (3.0 * ct * ct - 1.0),
            -(15.0 / (8.0 * PI)).sqrt() * st * ct,
            (15.0 / (32.0 * PI)).sqrt() * st * st,
        ];
        for m in 0..=lmax {
            let rec = OrderRecurrence::new(m, lmax);
            let mut alm = vec![Complex64::new(0.0, 0.0); lmax + 1 - m];
            alm[2 - m] = Complex64::new(1.0, 0.0);
            let mut out = vec![Complex64::new(0.0, 0.0); 2];
            synthesis_order::<PlainMulAdd, 4>(&rec, norms[m], &pairs, &alm, &mut out);
            assert!((out[0].re - expect[m]).abs() < 1e-15, "m={m}");
            // South ring: (−1)^(ℓ+m) λ.
            let sign = if (2 + m) % 2 == 0 { 1.0 } else { -1.0 };
            assert!((out[1].re - sign * expect[m]).abs() < 1e-15, "m={m}");
        }
    }
}
