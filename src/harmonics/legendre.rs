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
//! scale s ≥ 0; the recurrence runs on v (it is linear) and, checked every 8 degrees, v is
//! brought back by 2^−500 whenever it exceeds 2^200, until s = 0. While s > 0 the true value is
//! below about 2^−240 (growth over 8 degrees stays below 2^60) and the term is left out of the
//! sums. A ring whose λ_ℓm stays scaled up to ℓmax is "dead" for that m;
//! since |λ_ℓm(θ)| grows monotonically with θ from the pole up to its first extremum, every ring
//! nearer the pole is dead too, which lets the stages stop early.
//!
//! North/south symmetry: λ_ℓm(π − θ) = (−1)^(ℓ+m) λ_ℓm(θ), so one recurrence serves a ring pair
//! by summing even and odd ℓ − m separately. The stages run the recurrence two degrees per step,
//! on the even degrees only, in cos²θ; the odd degrees follow from them (see
//! [`OrderRecurrence`]).

use num_complex::Complex64;

/// Rescaling: values carry a factor 2^(−SCALE_LOG2 · s).
pub(crate) const SCALE_LOG2: f64 = 500.0;
/// Scaled values above this are brought down by 2^−500.
const SCALE_LIMIT: f64 = 1.606_938_044_258_990_3e60; // 2^200 (exact: checked in a unit test)
/// 2^−500.
const SCALE_DOWN: f64 = 3.054_936_363_499_605e-151;
/// Number of passes (two recurrence steps, four degrees) between rescaling checks: a check every
/// 8 degrees (growth per check stays far below 2^800).
const PASSES_PER_CHECK: usize = 2;

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

/// Recurrence coefficients for one order m in steps of two degrees.
///
/// Even degrees: μ_j = λ_{m+2j,m} satisfy, from two steps of the three-term recurrence,
/// μ_{j+1} = (P_j z² + Q_j) μ_j − R_j μ_{j−1} with, for ℓ = m + 2j,
/// P_j = α_{ℓ+2} α_{ℓ+1}, Q_j = −γ_{ℓ+2} − α_{ℓ+2} γ_{ℓ+1}/α_ℓ, R_j = α_{ℓ+2} γ_{ℓ+1} γ_ℓ/α_ℓ
/// (the α_ℓ terms vanish at j = 0, where γ_{m+1} = 0). It is run on rescaled values
/// ν_j = μ_j / c_j with c_0 = c_1 = 1 and c_{j+1} = R_j c_{j−1}, which makes it
/// ν_{j+1} = (A_j z² + B_j) ν_j − ν_{j−1}, A_j = P_j c_j/c_{j+1}, B_j = Q_j c_j/c_{j+1}.
///
/// Odd degrees follow from the even ones: λ_{m+2j+1} = α z μ_j − γ λ_{m+2j−1} (α, γ of degree
/// m + 2j + 1), so a sum over odd degrees is z times a sum over the μ_j with transformed
/// coefficients (synthesis), and the sums Σ z μ_j X give the odd-degree sums by that same
/// recurrence (analysis). One recurrence step then serves two degrees: 2 multiply-adds per two
/// degrees instead of 4 (the even/odd split of Ishioka 2018, J. Meteorol. Soc. Japan 96, 241).
pub(crate) struct OrderRecurrence {
    pub m: usize,
    /// (A_j, B_j), j = 0 … even_count − 2.
    ab: Vec<[f64; 2]>,
    /// c_j, j = 0 … even_count − 1.
    c: Vec<f64>,
    /// (α, γ) of the odd degrees m + 2j + 1, j = 0 … odd_count − 1.
    odd: Vec<[f64; 2]>,
}

impl OrderRecurrence {
    pub fn new(m: usize, lmax: usize) -> Self {
        let n = lmax - m;
        let mf = m as f64;
        // α_ℓ and γ_ℓ for k = ℓ − m = 1 … n (index 0 unused).
        let mut alpha = vec![0.0; n + 1];
        let mut gamma = vec![0.0; n + 1];
        for k in 1..=n {
            let l = (m + k) as f64;
            alpha[k] = ((4.0 * l * l - 1.0) / ((l - mf) * (l + mf))).sqrt();
            let lm1 = l - 1.0;
            gamma[k] = alpha[k] * (((lm1 - mf) * (lm1 + mf)) / (4.0 * lm1 * lm1 - 1.0)).sqrt();
        }
        let even_count = n / 2 + 1;
        let mut ab = Vec::with_capacity(even_count - 1);
        let mut c = vec![1.0; even_count];
        for j in 0..even_count - 1 {
            let k = 2 * j;
            let p = alpha[k + 2] * alpha[k + 1];
            let (q, r) = if j == 0 {
                (-gamma[2], 0.0)
            } else {
                let t = alpha[k + 2] * gamma[k + 1] / alpha[k];
                (-gamma[k + 2] - t, t * gamma[k])
            };
            if j >= 1 {
                c[j + 1] = r * c[j - 1];
            }
            let ratio = c[j] / c[j + 1];
            ab.push([p * ratio, q * ratio]);
        }
        let odd = (0..n.div_ceil(2))
            .map(|j| [alpha[2 * j + 1], gamma[2 * j + 1]])
            .collect();
        OrderRecurrence { m, ab, c, odd }
    }

    /// Number of even degrees m, m + 2, … ≤ lmax.
    fn even_count(&self) -> usize {
        self.c.len()
    }

    /// Synthesis coefficients of the rescaled recurrence from a_ℓm (ℓ = m … lmax): for each j,
    /// (c_j a_{m+2j}, c_j õ_j) with õ_j = α_{m+2j+1} w_j, w_j = a_{m+2j+1} − γ_{m+2j+3} w_{j+1}
    /// (summation by parts of the odd-degree recurrence), so that
    /// Σ_ℓ a_ℓ λ_ℓ(±z) = Σ_j ν_j (E_j ± z O_j).
    fn synthesis_coefficients(&self, alm: &[Complex64]) -> Vec<[Complex64; 2]> {
        let zero = Complex64::new(0.0, 0.0);
        let mut out: Vec<[Complex64; 2]> = self
            .c
            .iter()
            .enumerate()
            .map(|(j, &c)| [alm[2 * j] * c, zero])
            .collect();
        let mut w = zero;
        for j in (0..self.odd.len()).rev() {
            let next_gamma = self.odd.get(j + 1).map_or(0.0, |o| o[1]);
            w = alm[2 * j + 1] - w * next_gamma;
            out[j][1] = w * (self.odd[j][0] * self.c[j]);
        }
        out
    }

    /// a_ℓm from the rescaled sums: `even[j]` = Σ ν_j X_even and `odd[j]` = Σ ν_j z X_odd;
    /// a_{m+2j} = c_j even[j] and a_{m+2j+1} = U_j = α c_j odd[j] − γ U_{j−1}.
    fn analysis_coefficients(
        &self,
        sums: impl Iterator<Item = (Complex64, Complex64)>,
        out: &mut [Complex64],
        accumulate: bool,
    ) {
        let mut put = |k: usize, v: Complex64| {
            out[k] = if accumulate { out[k] + v } else { v };
        };
        let mut u = Complex64::new(0.0, 0.0);
        for (j, (even, odd)) in sums.enumerate() {
            let c = self.c[j];
            put(2 * j, even * c);
            if let Some(&[alpha, gamma]) = self.odd.get(j) {
                u = odd * (alpha * c) - u * gamma;
                put(2 * j + 1, u);
            }
        }
    }
}

/// Ring pairs seen by the Legendre stages: pair p has its north ring at z[p] ≥ 0, p = 0 nearest
/// the north pole; the last pair is the equator ring when it is its own mirror.
pub(crate) struct RingPairs {
    pub z: Vec<f64>,
    /// log2 sin θ of each pair (the sectoral start λ_mm ∝ sin^m θ is built from it).
    log2_sin: Vec<f64>,
}

impl RingPairs {
    pub fn new(z: Vec<f64>, sin_theta: Vec<f64>) -> Self {
        let log2_sin = sin_theta.iter().map(|s| s.log2()).collect();
        RingPairs { z, log2_sin }
    }

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
        let log2 = log2_norm + m as f64 * pairs.log2_sin[p];
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

/// [`rescale`] for the scalar stages, without a branch per lane so that it vectorises: the
/// same bits (a lane not brought down is multiplied by exactly 1), and `live` is rebuilt from
/// the scales.
#[inline(always)]
fn rescale_lanes<const L: usize>(
    p0: &mut [f64; L],
    p1: &mut [f64; L],
    s: &mut [i32; L],
    live: &mut [f64; L],
) -> bool {
    let mut scaled = 0i32;
    for r in 0..L {
        let down = (s[r] > 0) & (p1[r].abs() > SCALE_LIMIT);
        let factor = if down { SCALE_DOWN } else { 1.0 };
        p0[r] *= factor;
        p1[r] *= factor;
        s[r] -= i32::from(down);
        live[r] = if s[r] == 0 { 1.0 } else { 0.0 };
        scaled |= i32::from(s[r] > 0);
    }
    scaled != 0
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

/// Lane-wise product x · live.
#[inline(always)]
fn masked<const L: usize>(x: &[f64; L], live: &[f64; L]) -> [f64; L] {
    let mut y = [0.0f64; L];
    for r in 0..L {
        y[r] = x[r] * live[r];
    }
    y
}

/// One recurrence step on all lanes: new = (A z² + B) cur − prev, stored over `prev`.
#[inline(always)]
fn step<A: MulAdd, const L: usize>(
    ab: [f64; 2],
    z2: &[f64; L],
    cur: &[f64; L],
    prev: &mut [f64; L],
) {
    for r in 0..L {
        prev[r] = A::mul_add(A::mul_add(ab[0], z2[r], ab[1]), cur[r], -prev[r]);
    }
}

/// What a Legendre stage does with ν_j of every lane of a block (lanes still scaled down
/// arrive as 0).
trait LaneSink<const L: usize> {
    fn add(&mut self, j: usize, nu: &[f64; L]);
}

/// Runs the rescaled even-degree recurrence ν_0 … ν_{J−1} over one block, handing each ν_j to
/// `sink`; returns the lanes' final scales (all > 0: the lane never reached its true scale).
///
/// Three phases share the lane registers: while some lane is scaled down, steps go in passes
/// between rescaling checks and dead lanes are masked; then plain steps; then the last odd one.
#[inline(always)]
fn walk_block<A: MulAdd, S: LaneSink<L>, const L: usize>(
    rec: &OrderRecurrence,
    blk: &Block<L>,
    sink: &mut S,
) -> [i32; L] {
    let count = rec.even_count();
    let ab = &rec.ab;
    let z2 = blk.z.map(|z| z * z);
    let mut s = blk.s;
    let mut p1 = blk.v;
    let mut p0 = [0.0f64; L];
    let mut live = live_lanes(&s);
    let none_live = |live: &[f64; L]| live.iter().all(|&x| x == 0.0);
    // A lane still scaled down adds an exact +0 (the sums are never −0), so while no lane is
    // live the sums are skipped and only the recurrence runs: the same bits, less work.
    if !none_live(&live) {
        sink.add(0, &masked(&p1, &live));
    }
    let mut j = 1;
    let mut scaled = s.iter().any(|&x| x > 0);
    while scaled && j + 1 < count {
        let mut pass = 0;
        if none_live(&live) {
            while pass < PASSES_PER_CHECK && j + 1 < count {
                step::<A, L>(ab[j - 1], &z2, &p1, &mut p0);
                step::<A, L>(ab[j], &z2, &p0, &mut p1);
                j += 2;
                pass += 1;
            }
        } else {
            while pass < PASSES_PER_CHECK && j + 1 < count {
                step::<A, L>(ab[j - 1], &z2, &p1, &mut p0);
                sink.add(j, &masked(&p0, &live));
                step::<A, L>(ab[j], &z2, &p0, &mut p1);
                sink.add(j + 1, &masked(&p1, &live));
                j += 2;
                pass += 1;
            }
        }
        scaled = rescale_lanes(&mut p0, &mut p1, &mut s, &mut live);
    }
    if !scaled {
        // Every lane at its true scale: no masks.
        walk_live::<A, S, L>(ab, &z2, [&mut p0, &mut p1], j..count, sink);
    } else if j < count {
        step::<A, L>(ab[j - 1], &z2, &p1, &mut p0);
        sink.add(j, &masked(&p0, &live));
    }
    s
}

/// The recurrence on lanes all at their true scale, for j in `range` (from 0: ν_0 is
/// `prev_cur[1]`), with `prev_cur` = (ν_{j−2}, ν_{j−1}) on entry.
#[inline(always)]
fn walk_live<A: MulAdd, S: LaneSink<L>, const L: usize>(
    ab: &[[f64; 2]],
    z2: &[f64; L],
    prev_cur: [&mut [f64; L]; 2],
    range: std::ops::Range<usize>,
    sink: &mut S,
) {
    let [p0, p1] = prev_cur;
    let mut j = range.start;
    if j == 0 {
        sink.add(0, p1);
        j = 1;
    }
    while j + 1 < range.end {
        step::<A, L>(ab[j - 1], z2, p1, p0);
        sink.add(j, p0);
        step::<A, L>(ab[j], z2, p0, p1);
        sink.add(j + 1, p1);
        j += 2;
    }
    if j < range.end {
        step::<A, L>(ab[j - 1], z2, p1, p0);
        sink.add(j, p0);
    }
}

/// Synthesis sums of a block: per lane, E = Σ_j ν_j E_j and O = Σ_j ν_j O_j.
struct SynthesisSums<'c, A, const L: usize> {
    coef: &'c [[Complex64; 2]],
    er: [f64; L],
    ei: [f64; L],
    or: [f64; L],
    oi: [f64; L],
    _fma: std::marker::PhantomData<A>,
}

impl<A: MulAdd, const L: usize> LaneSink<L> for SynthesisSums<'_, A, L> {
    #[inline(always)]
    fn add(&mut self, j: usize, nu: &[f64; L]) {
        let [e, o] = self.coef[j];
        for (r, &n) in nu.iter().enumerate() {
            self.er[r] = A::mul_add(e.re, n, self.er[r]);
            self.ei[r] = A::mul_add(e.im, n, self.ei[r]);
            self.or[r] = A::mul_add(o.re, n, self.or[r]);
            self.oi[r] = A::mul_add(o.im, n, self.oi[r]);
        }
    }
}

/// Legendre stage of synthesis for one order m: for every ring pair, the north and south
/// ring sums F_m = Σ_ℓ a_ℓm λ_ℓm(±z) = E ± z O, written as out[2p] (north) and out[2p + 1]
/// (south).
#[inline(always)]
pub(crate) fn synthesis_order<A: MulAdd, const L: usize>(
    rec: &OrderRecurrence,
    log2_norm: f64,
    pairs: &RingPairs,
    alm: &[Complex64],
    out: &mut [Complex64],
) {
    out.fill(Complex64::new(0.0, 0.0));
    let coef = rec.synthesis_coefficients(alm);
    let mut b = 0;
    while let Some(blk) = block::<L>(b, pairs, rec.m, log2_norm) {
        b += 1;
        let mut sums = SynthesisSums::<A, L> {
            coef: &coef,
            er: [0.0; L],
            ei: [0.0; L],
            or: [0.0; L],
            oi: [0.0; L],
            _fma: std::marker::PhantomData,
        };
        let s = walk_block::<A, _, L>(rec, &blk, &mut sums);
        // North and south over all lanes first (constant indices keep the sums in registers).
        let mut north = [Complex64::new(0.0, 0.0); L];
        let mut south = north;
        for r in 0..L {
            let z = blk.z[r];
            let (or, oi) = (z * sums.or[r], z * sums.oi[r]);
            north[r] = Complex64::new(sums.er[r] + or, sums.ei[r] + oi);
            south[r] = Complex64::new(sums.er[r] - or, sums.ei[r] - oi);
        }
        for r in 0..blk.valid {
            let p = blk.pairs[r];
            out[2 * p] = north[r];
            out[2 * p + 1] = south[r];
        }
        if s[..blk.valid].iter().all(|&x| x > 0) {
            // Whole block dead: every ring nearer the pole is dead too.
            break;
        }
    }
}

/// Analysis sums of a block: each ν_j's lane products are summed over the block's L/W groups
/// of W lanes in registers and added to row j (W lanes each of Σ ν X_even re, im and
/// Σ ν z X_odd re, im), one load and store per W lanes and block instead of per lane.
struct AnalysisSums<'r, A, const L: usize, const W: usize> {
    rows: &'r mut [[[f64; W]; 4]],
    /// X_even re, im and z X_odd re, im of every lane.
    x: &'r [[f64; L]; 4],
    _fma: std::marker::PhantomData<A>,
}

impl<A: MulAdd, const L: usize, const W: usize> LaneSink<L> for AnalysisSums<'_, A, L, W> {
    #[inline(always)]
    fn add(&mut self, j: usize, nu: &[f64; L]) {
        let row = &mut self.rows[j];
        for (t, x) in row.iter_mut().zip(self.x) {
            let mut acc = *t;
            for g in 0..L / W {
                for w in 0..W {
                    acc[w] = A::mul_add(nu[g * W + w], x[g * W + w], acc[w]);
                }
            }
            *t = acc;
        }
    }
}

/// Legendre stage of analysis for one order m: out[ℓ − m] = Σ_pairs λ_ℓm(z) X, with
/// X = G_north + G_south for even ℓ − m and G_north − G_south for odd ℓ − m, where
/// `ring_sums[2p]` and `ring_sums[2p + 1]` are G_north and G_south of pair p (the weighted
/// azimuthal sums of the map; 0 for the south of the equator ring, its own mirror).
///
/// With `accumulate`, the sums are added to `out` (a Jacobi correction) instead of replacing it.
/// `rows` is scratch for the partial sums (any contents; resized here).
///
/// Blocks of L pairs add into W-lane partial sums per even degree (see [`AnalysisSums`]); the
/// W lanes are summed once at the end in a fixed pairwise order, so the result does not
/// depend on scheduling.
#[inline(always)]
pub(crate) fn analysis_order<A: MulAdd, const L: usize, const W: usize>(
    rec: &OrderRecurrence,
    log2_norm: f64,
    pairs: &RingPairs,
    ring_sums: &[Complex64],
    out: &mut [Complex64],
    accumulate: bool,
    rows: &mut Vec<[[f64; W]; 4]>,
) {
    const { assert!(L.is_multiple_of(W) && W.is_power_of_two()) };
    let count = rec.even_count();
    // The partial sums live in the caller's scratch, reused from order to order.
    rows.clear();
    rows.resize(count, [[0.0f64; W]; 4]);
    let rows = &mut rows[..];
    let mut b = 0;
    // Block by block from the equator, until one ends with all its lanes scaled down (every
    // ring nearer the pole is dead too).
    while let Some(blk) = block::<L>(b, pairs, rec.m, log2_norm) {
        b += 1;
        // X_even re, im and z X_odd re, im of every lane.
        let mut x = [[0.0f64; L]; 4];
        for (r, (&p, &z)) in blk.pairs.iter().zip(&blk.z).enumerate().take(blk.valid) {
            let (g_n, g_s) = (ring_sums[2 * p], ring_sums[2 * p + 1]);
            x[0][r] = g_n.re + g_s.re;
            x[1][r] = g_n.im + g_s.im;
            x[2][r] = z * (g_n.re - g_s.re);
            x[3][r] = z * (g_n.im - g_s.im);
        }
        let mut sums = AnalysisSums::<A, L, W> {
            rows: &mut *rows,
            x: &x,
            _fma: std::marker::PhantomData,
        };
        let s = walk_block::<A, _, L>(rec, &blk, &mut sums);
        if s[..blk.valid].iter().all(|&x| x > 0) {
            break;
        }
    }
    let sums = rows.iter().map(|[er, ei, or, oi]| {
        (
            Complex64::new(pairwise_sum::<W>(er), pairwise_sum::<W>(ei)),
            Complex64::new(pairwise_sum::<W>(or), pairwise_sum::<W>(oi)),
        )
    });
    rec.analysis_coefficients(sums, out, accumulate);
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
        let pairs = RingPairs::new(vec![ct], vec![st]);
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
