//! MASTER deconvolution of pseudo-C_ℓ (Hivon et al. 2002, ApJ 567, 2): the mode-coupling matrix
//! of a weight map, its binned form with beam and pixel window, and the binned solve.
//!
//! A map f observed through weights W has the pseudo-spectrum C̃_ℓ, whose expectation over
//! isotropic skies is ⟨C̃_ℓ⟩ = Σ_ℓ' M_ℓℓ' T_ℓ'² C_ℓ' with T_ℓ = B_ℓ p_ℓ the beam times the pixel
//! window and (Hivon et al. 2002 eq. A31)
//!
//! M_ℓ1ℓ2 = (2ℓ2+1)/(4π) Σ_ℓ3 (2ℓ3+1) W_ℓ3 (ℓ1 ℓ2 ℓ3; 0 0 0)²,
//!
//! W_ℓ the pseudo-spectrum of the weight map itself (computed with the crate's harmonic
//! transform) and the 3j symbols from [`crate::harmonics::wigner`]. With bins b, binning operator P_bℓ and
//! its reciprocal Q_ℓb (Hivon et al. 2002 eqs. 18–20), the binned kernel is
//!
//! K_bb' = Σ_{ℓ∈b} Σ_{ℓ'∈b'} P_bℓ M_ℓℓ' T_ℓ'² Q_ℓ'b',
//!
//! and the deconvolved band powers are Ĉ_b = Σ_b' (K⁻¹)_bb' Σ_ℓ P_b'ℓ C̃_ℓ. Multipoles outside the
//! bins (ℓ = 0, 1 and above ℓmax) are assumed to carry no power. The weight spectrum is known up
//! to the largest ℓ the harmonic transform allows (3·NSIDE − 1); beyond it W_ℓ is taken as zero
//! (common practice), which only matters for masks with structure at the pixel scale.
//!
//! The pixel window p_ℓ of HEALPix pixels is [`healpix_pixel_window`]; the Gaussian beam is
//! [`crate::harmonics::gaussian_beam`], B_ℓ = exp(−ℓ(ℓ+1)σ²/2), σ = FWHM/√(8 ln 2).

use crate::error::{Error, Result};
use crate::harmonics::wigner::wigner_3j_squared_zero_m;
use rayon::prelude::*;

/// How a bin averages the multipoles it holds (Hivon et al. 2002 eq. 20).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum BinWeighting {
    /// Band power of C_ℓ: P_bℓ = 1/n_b, Q_ℓb = 1 (C_ℓ assumed flat inside a bin).
    Cl,
    /// Band power of D_ℓ = ℓ(ℓ+1)C_ℓ/(2π): P_bℓ = ℓ(ℓ+1)/(2π n_b), Q_ℓb = 2π/(ℓ(ℓ+1)) (D_ℓ
    /// assumed flat inside a bin).
    Dl,
}

/// Contiguous multipole bins [ℓ_lo, ℓ_hi] with their weighting.
#[derive(Debug, Clone, PartialEq)]
pub struct Binning {
    ranges: Vec<(usize, usize)>,
    weighting: BinWeighting,
}

impl Binning {
    /// Bins of `width` multipoles from `ell_min` to `lmax` (the last one may be narrower), as
    /// [`crate::harmonics::spectra::bin_spectrum`] cuts them.
    pub fn uniform(
        ell_min: usize,
        lmax: usize,
        width: usize,
        weighting: BinWeighting,
    ) -> Result<Self> {
        if width == 0 {
            return Err(Error::Setting("bin width must be at least 1".into()));
        }
        if ell_min > lmax {
            return Err(Error::Setting(format!(
                "first binned multipole {ell_min} is above lmax {lmax}"
            )));
        }
        if weighting == BinWeighting::Dl && ell_min == 0 {
            return Err(Error::Setting(
                "D_ell band powers need bins that start at ell >= 1".into(),
            ));
        }
        let mut ranges = Vec::new();
        let mut start = ell_min;
        while start <= lmax {
            let end = (start + width - 1).min(lmax);
            ranges.push((start, end));
            start = end + 1;
        }
        Ok(Binning { ranges, weighting })
    }

    /// The bins as inclusive (ℓ_lo, ℓ_hi).
    pub fn ranges(&self) -> &[(usize, usize)] {
        &self.ranges
    }

    /// The weighting of the bins.
    pub fn weighting(&self) -> BinWeighting {
        self.weighting
    }

    /// Number of bins.
    pub fn len(&self) -> usize {
        self.ranges.len()
    }

    /// True when there are no bins.
    pub fn is_empty(&self) -> bool {
        self.ranges.is_empty()
    }

    /// Largest multipole in a bin.
    pub fn lmax(&self) -> usize {
        self.ranges.last().map_or(0, |r| r.1)
    }

    /// P_bℓ for ℓ in bin b (Hivon et al. 2002 eq. 20).
    pub fn p(&self, bin: usize, ell: usize) -> f64 {
        let (lo, hi) = self.ranges[bin];
        let n = (hi - lo + 1) as f64;
        match self.weighting {
            BinWeighting::Cl => 1.0 / n,
            BinWeighting::Dl => (ell * (ell + 1)) as f64 / (2.0 * std::f64::consts::PI) / n,
        }
    }

    /// Q_ℓb for ℓ in bin b (Hivon et al. 2002 eq. 20).
    pub fn q(&self, ell: usize) -> f64 {
        match self.weighting {
            BinWeighting::Cl => 1.0,
            BinWeighting::Dl => 2.0 * std::f64::consts::PI / (ell * (ell + 1)) as f64,
        }
    }

    /// Σ_ℓ P_bℓ c_ℓ for every bin (`cl` must reach the last binned ℓ).
    pub fn bin(&self, cl: &[f64]) -> Result<Vec<f64>> {
        if cl.len() <= self.lmax() {
            return Err(Error::Mismatch(format!(
                "spectrum has {} multipoles, the bins reach lmax {}",
                cl.len(),
                self.lmax()
            )));
        }
        Ok(self
            .ranges
            .iter()
            .enumerate()
            .map(|(b, &(lo, hi))| (lo..=hi).map(|l| self.p(b, l) * cl[l]).sum())
            .collect())
    }
}

/// The mode-coupling matrix M_ℓ1ℓ2, 0 ≤ ℓ1, ℓ2 ≤ ℓmax, of a weight map with pseudo-spectrum
/// W_ℓ (Hivon et al. 2002 eq. A31; module documentation).
#[derive(Debug, Clone)]
pub struct CouplingMatrix {
    lmax: usize,
    /// Ξ_ℓ1ℓ2 = (1/4π) Σ_ℓ3 (2ℓ3+1) W_ℓ3 (ℓ1 ℓ2 ℓ3; 0 0 0)², symmetric, row-major.
    symmetric: Vec<f64>,
}

impl CouplingMatrix {
    /// M for ℓ1, ℓ2 ≤ `lmax` from the weight spectrum `weight_cl` (W_ℓ for ℓ = 0, 1, …; values
    /// beyond its end are taken as 0). The sum over ℓ3 runs from |ℓ1−ℓ2| up to
    /// min(ℓ1+ℓ2, len − 1) in increasing order; rows are computed in parallel and each entry by
    /// one thread, so the result is the same for any thread count. Cost ∝ ℓmax³, or ℓmax² · L
    /// when W_ℓ vanishes above L.
    pub fn new(weight_cl: &[f64], lmax: usize) -> Result<Self> {
        if let Some((l, w)) = weight_cl.iter().enumerate().find(|(_, w)| !w.is_finite()) {
            return Err(Error::Data(format!(
                "weight spectrum at ell {l} is not finite ({w})"
            )));
        }
        let lw = weight_cl.len();
        let weighted: Vec<f64> = weight_cl
            .iter()
            .enumerate()
            .map(|(l, w)| (2 * l + 1) as f64 * w / (4.0 * std::f64::consts::PI))
            .collect();
        // Terms with W_ℓ3 = 0 add exact zeros, so pairs with ℓ2 − ℓ1 above the last non-zero
        // W_ℓ3 are 0 without computing their 3j symbols (same result, bit for bit; for a full
        // sky, W_ℓ = 4π δ_ℓ0, only the diagonal is computed).
        let support = weighted.iter().rposition(|&w| w != 0.0);
        let rows: Vec<Vec<f64>> = (0..=lmax)
            .into_par_iter()
            .map_init(Vec::new, |squares, l1| {
                (l1..=lmax)
                    .map(|l2| {
                        if support.is_none_or(|s| l2 - l1 > s) {
                            return 0.0;
                        }
                        let first = wigner_3j_squared_zero_m(l1, l2, squares);
                        let last = (l1 + l2).min(lw.saturating_sub(1));
                        let mut sum = 0.0;
                        let mut l3 = first;
                        while l3 <= last && lw > 0 {
                            sum += weighted[l3] * squares[l3 - first];
                            l3 += 2;
                        }
                        sum
                    })
                    .collect()
            })
            .collect();
        let n = lmax + 1;
        let mut symmetric = vec![0.0; n * n];
        for (l1, row) in rows.iter().enumerate() {
            for (k, &v) in row.iter().enumerate() {
                let l2 = l1 + k;
                symmetric[l1 * n + l2] = v;
                symmetric[l2 * n + l1] = v;
            }
        }
        Ok(CouplingMatrix { lmax, symmetric })
    }

    /// Largest multipole of the matrix.
    pub fn lmax(&self) -> usize {
        self.lmax
    }

    /// M_ℓ1ℓ2 (zero outside 0..=ℓmax).
    pub fn get(&self, l1: usize, l2: usize) -> f64 {
        if l1 > self.lmax || l2 > self.lmax {
            return 0.0;
        }
        (2 * l2 + 1) as f64 * self.symmetric[l1 * (self.lmax + 1) + l2]
    }
}

/// The binned MASTER kernel K_bb' and its LU factors, ready to deconvolve binned pseudo-C_ℓ.
#[derive(Debug, Clone)]
pub struct MasterDeconvolution {
    binning: Binning,
    kernel: Vec<f64>,
    lu: nalgebra::LU<f64, nalgebra::Dyn, nalgebra::Dyn>,
}

impl MasterDeconvolution {
    /// K_bb' = Σ_{ℓ∈b} Σ_{ℓ'∈b'} P_bℓ M_ℓℓ' T_ℓ'² Q_ℓ'b' (Hivon et al. 2002 eq. 20) with
    /// `transfer` T_ℓ = B_ℓ p_ℓ for ℓ = 0 … (at least) the last binned ℓ, and its LU factors
    /// with partial pivoting (nalgebra). An error if the bins reach past the matrix or K is
    /// singular.
    pub fn new(coupling: &CouplingMatrix, binning: Binning, transfer: &[f64]) -> Result<Self> {
        let lmax = binning.lmax();
        if binning.is_empty() || lmax > coupling.lmax() {
            return Err(Error::Mismatch(format!(
                "bins reach ell {lmax}, the coupling matrix only {}",
                coupling.lmax()
            )));
        }
        if transfer.len() <= lmax {
            return Err(Error::Mismatch(format!(
                "transfer function has {} multipoles, the bins reach {lmax}",
                transfer.len()
            )));
        }
        let first = binning.ranges()[0].0;
        if let Some((l, t)) = transfer[first..=lmax]
            .iter()
            .enumerate()
            .map(|(k, t)| (k + first, t))
            .find(|(_, t)| !(t.is_finite() && **t > 0.0))
        {
            return Err(Error::Setting(format!(
                "beam times pixel window at ell {l} is {t}: it must be finite and > 0 in the bins"
            )));
        }
        let nb = binning.len();
        let ranges = binning.ranges().to_vec();
        let mut kernel = vec![0.0; nb * nb];
        for (b, &(lo, hi)) in ranges.iter().enumerate() {
            for (c, &(lo2, hi2)) in ranges.iter().enumerate() {
                let mut k = 0.0;
                for l in lo..=hi {
                    let mut inner = 0.0;
                    for (l2, t) in transfer.iter().enumerate().take(hi2 + 1).skip(lo2) {
                        inner += coupling.get(l, l2) * t * t * binning.q(l2);
                    }
                    k += binning.p(b, l) * inner;
                }
                kernel[b * nb + c] = k;
            }
        }
        let matrix = nalgebra::DMatrix::from_row_slice(nb, nb, &kernel);
        let lu = matrix.lu();
        if !lu.is_invertible() {
            return Err(Error::Data(
                "the binned coupling matrix is singular: widen the bins or enlarge the footprint"
                    .into(),
            ));
        }
        Ok(MasterDeconvolution {
            binning,
            kernel,
            lu,
        })
    }

    /// The bins.
    pub fn binning(&self) -> &Binning {
        &self.binning
    }

    /// K_bb', row-major (row b, column b').
    pub fn kernel(&self) -> &[f64] {
        &self.kernel
    }

    /// Ĉ_b = Σ_b' (K⁻¹)_bb' Σ_ℓ P_b'ℓ C̃_ℓ from the raw pseudo-spectrum C̃_ℓ (the spectrum of
    /// the weighted map, not divided by w2; ℓ = 0 … at least the last binned ℓ).
    pub fn apply(&self, pseudo_cl: &[f64]) -> Result<Vec<f64>> {
        let binned = self.binning.bin(pseudo_cl)?;
        let rhs = nalgebra::DVector::from_vec(binned);
        let solution = self
            .lu
            .solve(&rhs)
            .ok_or_else(|| Error::Data("the binned coupling matrix is singular".into()))?;
        Ok(solution.iter().copied().collect())
    }
}

/// Pseudo-spectrum W_ℓ = Σ_m |w_ℓm|²/(2ℓ+1), ℓ = 0 … `sht.lmax()`, of a weight map in RING order
/// (healpy 1.20.1 `anafast` of the weights with the same number of iterations).
pub fn weight_spectrum(
    weights: &[f64],
    sht: &crate::harmonics::HarmonicTransform,
    iterations: usize,
) -> Result<Vec<f64>> {
    Ok(sht.analysis(weights, iterations)?.power_spectrum())
}

/// Pixel window p_ℓ of HEALPix pixels at `nside`, ℓ = 0 … `lmax`: the transfer function of
/// averaging a field over a pixel, averaged over all pixels,
///
/// p_ℓ² = (1/N_pix) Σ_p (1/Ω²) ∫_p ∫_p P_ℓ(n·n′) dn dn′
///
/// (addition theorem: (4π/(2ℓ+1)) Σ_m |pixel mean of Y_ℓm|², averaged over pixels; the
/// definition behind healpy's `pixwin` tables, Górski et al. 2005, ApJ 622, 759, §4). Each pixel
/// integral is approximated at levels k = 1, 2, 3 by [`sampled_pixel_window_squared`], whose
/// error is a series in even powers of the sub-pixel size h ∝ 2^−k; Richardson extrapolation
/// removes the h² and h⁴ terms: p² = (64 A₃ − 20 A₂ + A₁)/45.
pub fn healpix_pixel_window(nside: u32, lmax: usize) -> Result<Vec<f64>> {
    let a1 = sampled_pixel_window_squared(nside, lmax, 1)?;
    let a2 = sampled_pixel_window_squared(nside, lmax, 2)?;
    let a3 = sampled_pixel_window_squared(nside, lmax, 3)?;
    Ok((0..=lmax)
        .map(|l| {
            ((64.0 * a3[l] - 20.0 * a2[l] + a1[l]) / 45.0)
                .max(0.0)
                .sqrt()
        })
        .collect())
}

/// p_ℓ² with each pixel integral replaced by the mean over the pairs of its 4^k NESTED
/// sub-pixel centres, (1/N_pix) Σ_p (1/4^2k) Σ_{q,q′∈p} P_ℓ(n_q·n_q′). The pair separations of
/// the pixels of the northern quarter (the grid is symmetric under turns by π/2 and the
/// north–south reflection; in the equatorial zone one pixel per ring stands for its ring;
/// pixels are weighted by how many they stand for) are gathered
/// as squared chords u = |n − n′|² = 2(1 − cos θ) on a grid of 16 384 nodes in
/// u ∈ [0, (4 × mean spacing)²] with linear sharing between neighbouring nodes (P_ℓ(1 − u/2) is
/// analytic in u; the sharing error (ℓ²Δu)²/512 is below 1e-6 at ℓ = 3·NSIDE); P_ℓ is evaluated
/// on the nodes by the three-term recurrence (ℓ+1)P_ℓ+1 = (2ℓ+1)xP_ℓ − ℓP_ℓ−1. Pixels are processed in
/// fixed chunks whose sums are added in order, so the result is the same for any thread count.
pub fn sampled_pixel_window_squared(nside: u32, lmax: usize, k: u32) -> Result<Vec<f64>> {
    use crate::sky::pixelization::{Ordering, Pixelization};
    let coarse = Pixelization::new(nside, Ordering::Ring)?;
    if !nside.is_power_of_two() {
        return Err(Error::Geometry(format!(
            "the pixel window needs a power-of-two NSIDE, got {nside}"
        )));
    }
    let fine = Pixelization::new(nside << k, Ordering::Nested)?;
    let pixels = window_pixels(nside as u64);
    let chord2_max = (4.0 * coarse.mean_spacing()).powi(2);
    let nodes = 16_384usize;
    let step = chord2_max / (nodes - 1) as f64;
    let sub = 1u64 << (2 * k);
    let hist = chord_histogram(&coarse, &fine, &pixels, sub, (nodes, step))?;
    let total: f64 = hist.iter().sum();
    let w2 = legendre_sums(&hist, step, lmax);
    Ok(w2.into_iter().map(|v| v / total).collect())
}

/// The pixels whose sub-pixel pairs stand for the whole map, with how many pixels each stands
/// for: the first quarter of every northern polar ring and of ring NSIDE, and one pixel of each
/// ring below it (rings NSIDE+1 … 2·NSIDE lie wholly in the equatorial zone, whose pixel
/// boundaries are straight in (φ, z) and repeat every π/(2·NSIDE) in φ, so the pixels of such a
/// ring are turned copies of each other), mirrored to the south.
fn window_pixels(n: u64) -> Vec<(u64, f64)> {
    // first pixel of ring i (1-based) and its pixel count, northern hemisphere and equator
    let ring_start = |i: u64| {
        if i < n {
            2 * i * (i - 1)
        } else {
            2 * n * (n - 1) + 4 * n * (i - n)
        }
    };
    let ring_len = |i: u64| if i < n { 4 * i } else { 4 * n };
    let mut pixels: Vec<(u64, f64)> = Vec::new();
    for i in 1..=2 * n {
        let mirror = if i == 2 * n { 1.0 } else { 2.0 };
        if i <= n {
            for j in 0..ring_len(i) / 4 {
                pixels.push((ring_start(i) + j, 4.0 * mirror));
            }
        } else {
            pixels.push((ring_start(i), ring_len(i) as f64 * mirror));
        }
    }
    pixels
}

/// Weighted histogram of the squared chords between the `sub` fine sub-pixel centres of each
/// listed pixel, shared linearly between the two nearest of `nodes` nodes spaced by `step`;
/// summed over fixed chunks of 64 pixels in order, so independent of the thread count.
fn chord_histogram(
    coarse: &crate::sky::pixelization::Pixelization,
    fine: &crate::sky::pixelization::Pixelization,
    pixels: &[(u64, f64)],
    sub: u64,
    (nodes, step): (usize, f64),
) -> Result<Vec<f64>> {
    let histograms: Vec<Result<Vec<f64>>> = pixels
        .par_chunks(64)
        .map(|part| {
            let mut hist = vec![0.0; nodes];
            let mut points: Vec<[f64; 3]> = Vec::with_capacity(sub as usize);
            for &(p, weight) in part {
                let nested = coarse.to_nested(p)?;
                points.clear();
                for c in 0..sub {
                    points.push(fine.center(nested * sub + c).to_vector());
                }
                let w_pair = weight / (sub * sub) as f64;
                hist[0] += w_pair * sub as f64;
                for (a, u) in points.iter().enumerate() {
                    for v in &points[a + 1..] {
                        let chord2 =
                            (u[0] - v[0]).powi(2) + (u[1] - v[1]).powi(2) + (u[2] - v[2]).powi(2);
                        let x = chord2 / step;
                        let i0 = x.floor() as usize;
                        if i0 + 1 >= nodes {
                            return Err(Error::Geometry(
                                "a pixel is wider than the pixel window grid".into(),
                            ));
                        }
                        let f = x - i0 as f64;
                        hist[i0] += 2.0 * w_pair * (1.0 - f);
                        hist[i0 + 1] += 2.0 * w_pair * f;
                    }
                }
            }
            Ok(hist)
        })
        .collect();
    let mut hist = vec![0.0; nodes];
    for h in histograms {
        for (t, v) in hist.iter_mut().zip(h?) {
            *t += v;
        }
    }
    Ok(hist)
}

/// Σ_i h_i P_ℓ(1 − u_i/2) for ℓ = 0 … lmax over the histogram nodes u_i = i·`step`, P_ℓ by the
/// three-term recurrence (ℓ+1)P_ℓ+1 = (2ℓ+1)xP_ℓ − ℓP_ℓ−1.
fn legendre_sums(hist: &[f64], step: f64, lmax: usize) -> Vec<f64> {
    let mut w2 = vec![0.0; lmax + 1];
    for (i, &h) in hist.iter().enumerate() {
        if h == 0.0 {
            continue;
        }
        let x = 1.0 - 0.5 * i as f64 * step;
        let (mut prev, mut cur) = (1.0, x);
        w2[0] += h;
        if lmax >= 1 {
            w2[1] += h * x;
        }
        for (l, acc) in w2.iter_mut().enumerate().skip(2) {
            let lf = (l - 1) as f64;
            let next = ((2.0 * lf + 1.0) * x * cur - lf * prev) / (lf + 1.0);
            prev = cur;
            cur = next;
            *acc += h * cur;
        }
    }
    w2
}
