//! Spherical harmonic coefficients a_ℓm of a real map, angular power spectra, Gaussian random
//! coefficients for a given spectrum and Gaussian beam smoothing.

use num_complex::Complex64;
use rand::Rng;
use rand_distr::StandardNormal;

use crate::error::{Error, Result};

/// Number of stored coefficients for `lmax` (= mmax): (lmax + 1)(lmax + 2)/2.
pub fn coefficient_count(lmax: usize) -> usize {
    (lmax + 1) * (lmax + 2) / 2
}

/// The a_ℓm, 0 ≤ m ≤ ℓ ≤ lmax, of a real map (a_ℓ,−m = (−1)^m conj(a_ℓm) is implied).
///
/// Storage is m-major exactly as healpy orders it (healpy 1.20.1 `Alm.getidx` with
/// mmax = lmax): index(ℓ, m) = m(2 lmax + 1 − m)/2 + ℓ.
#[derive(Debug, Clone, PartialEq)]
pub struct HarmonicCoefficients {
    lmax: usize,
    data: Vec<Complex64>,
}

impl HarmonicCoefficients {
    /// All-zero coefficients up to `lmax`.
    pub fn zeros(lmax: usize) -> Self {
        HarmonicCoefficients {
            lmax,
            data: vec![Complex64::new(0.0, 0.0); coefficient_count(lmax)],
        }
    }

    /// Wrap coefficients stored in healpy's order; the length must be (lmax + 1)(lmax + 2)/2.
    pub fn from_vec(lmax: usize, data: Vec<Complex64>) -> Result<Self> {
        let want = coefficient_count(lmax);
        if data.len() != want {
            return Err(Error::Mismatch(format!(
                "{} harmonic coefficients given, lmax {lmax} needs {want}",
                data.len()
            )));
        }
        Ok(HarmonicCoefficients { lmax, data })
    }

    /// Largest multipole ℓ (and order m).
    pub fn lmax(&self) -> usize {
        self.lmax
    }

    /// Largest order m (always equal to lmax).
    pub fn mmax(&self) -> usize {
        self.lmax
    }

    /// Position of a_ℓm in the storage: m(2 lmax + 1 − m)/2 + ℓ.
    ///
    /// Panics unless m ≤ ℓ ≤ lmax.
    pub fn index(&self, l: usize, m: usize) -> usize {
        assert!(
            m <= l && l <= self.lmax,
            "a_lm index needs m <= l <= lmax, got l={l}, m={m}, lmax={}",
            self.lmax
        );
        m * (2 * self.lmax + 1 - m) / 2 + l
    }

    /// a_ℓm; panics unless m ≤ ℓ ≤ lmax.
    pub fn get(&self, l: usize, m: usize) -> Complex64 {
        self.data[self.index(l, m)]
    }

    /// Set a_ℓm; panics unless m ≤ ℓ ≤ lmax.
    pub fn set(&mut self, l: usize, m: usize, value: Complex64) {
        let i = self.index(l, m);
        self.data[i] = value;
    }

    /// All coefficients in storage order.
    pub fn as_slice(&self) -> &[Complex64] {
        &self.data
    }

    /// All coefficients in storage order, mutable.
    pub fn as_mut_slice(&mut self) -> &mut [Complex64] {
        &mut self.data
    }

    /// The coefficients of order m, ℓ = m … lmax (a contiguous slice).
    pub fn order(&self, m: usize) -> &[Complex64] {
        let start = self.index(m, m);
        &self.data[start..start + self.lmax + 1 - m]
    }

    /// Consume into the storage vector.
    pub fn into_vec(self) -> Vec<Complex64> {
        self.data
    }

    /// Angular power spectrum Cℓ = (|a_ℓ0|² + 2 Σ_{m>0} |a_ℓm|²)/(2ℓ + 1), ℓ = 0 … lmax
    /// (healpy 1.20.1 `alm2cl`).
    pub fn power_spectrum(&self) -> Vec<f64> {
        self.spectrum_with(self)
    }

    /// Cross-spectrum Cℓ = (Re a_ℓ0 conj b_ℓ0 + 2 Σ_{m>0} Re a_ℓm conj b_ℓm)/(2ℓ + 1) of two sets
    /// with the same lmax (healpy 1.20.1 `alm2cl(alms1, alms2)`).
    pub fn cross_spectrum(&self, other: &HarmonicCoefficients) -> Result<Vec<f64>> {
        if other.lmax != self.lmax {
            return Err(Error::Mismatch(format!(
                "cross-spectrum of coefficient sets with lmax {} and {}",
                self.lmax, other.lmax
            )));
        }
        Ok(self.spectrum_with(other))
    }

    fn spectrum_with(&self, other: &HarmonicCoefficients) -> Vec<f64> {
        let lmax = self.lmax;
        let mut cl = vec![0.0; lmax + 1];
        // Sum over m in increasing order for every ℓ (fixed order, thread independent).
        for m in 0..=lmax {
            let a = self.order(m);
            let b = other.order(m);
            let factor = if m == 0 { 1.0 } else { 2.0 };
            for (k, (x, y)) in a.iter().zip(b).enumerate() {
                cl[m + k] += factor * (x.re * y.re + x.im * y.im);
            }
        }
        for (l, c) in cl.iter_mut().enumerate() {
            *c /= (2 * l + 1) as f64;
        }
        cl
    }

    /// Multiply every a_ℓm by b_ℓ (a beam or window); `beam` must have at least lmax + 1 values.
    pub fn apply_beam(&mut self, beam: &[f64]) -> Result<()> {
        if beam.len() < self.lmax + 1 {
            return Err(Error::Mismatch(format!(
                "beam has {} multipoles, the coefficients need {}",
                beam.len(),
                self.lmax + 1
            )));
        }
        let lmax = self.lmax;
        let mut start = 0;
        for m in 0..=lmax {
            let len = lmax + 1 - m;
            for (k, a) in self.data[start..start + len].iter_mut().enumerate() {
                *a *= beam[m + k];
            }
            start += len;
        }
        Ok(())
    }

    /// Smooth by a Gaussian beam of full width at half maximum `fwhm` (radians), see
    /// [`gaussian_beam`].
    pub fn smooth_gaussian(&mut self, fwhm: f64) -> Result<()> {
        let beam = gaussian_beam(fwhm, self.lmax)?;
        self.apply_beam(&beam)
    }
}

/// Gaussian beam transfer function b_ℓ = exp(−ℓ(ℓ + 1)σ²/2), σ = FWHM/√(8 ln 2), ℓ = 0 … lmax
/// (common practice; same formula as healpy 1.20.1 `gauss_beam`). `fwhm` in radians, ≥ 0.
pub fn gaussian_beam(fwhm: f64, lmax: usize) -> Result<Vec<f64>> {
    if !(fwhm.is_finite() && fwhm >= 0.0) {
        return Err(Error::Setting(format!(
            "beam FWHM must be a finite angle >= 0 radians, got {}",
            crate::error::compact(fwhm)
        )));
    }
    let sigma = fwhm / (8.0 * std::f64::consts::LN_2).sqrt();
    Ok((0..=lmax)
        .map(|l| (-0.5 * (l * (l + 1)) as f64 * sigma * sigma).exp())
        .collect())
}

/// Gaussian random a_ℓm of an isotropic field with spectrum `cl` (ℓ = 0 … lmax, needs at least
/// lmax + 1 values, all ≥ 0): a_ℓ0 real with variance Cℓ, for m > 0 real and imaginary parts
/// independent with variance Cℓ/2 (common practice; the convention of healpy's `synalm`).
///
/// Draws are taken sequentially in storage order from `rng`, so a seeded generator (e.g.
/// `rand_chacha::ChaCha20Rng`) gives the same coefficients whatever the thread count.
pub fn alm_from_cl<R: Rng + ?Sized>(
    cl: &[f64],
    lmax: usize,
    rng: &mut R,
) -> Result<HarmonicCoefficients> {
    if cl.len() < lmax + 1 {
        return Err(Error::Mismatch(format!(
            "power spectrum has {} multipoles, lmax {lmax} needs {}",
            cl.len(),
            lmax + 1
        )));
    }
    if let Some((l, c)) = cl[..=lmax]
        .iter()
        .enumerate()
        .find(|(_, c)| !(c.is_finite() && **c >= 0.0))
    {
        return Err(Error::Data(format!(
            "power spectrum must be finite and >= 0, C_{l} = {c}"
        )));
    }
    let mut alm = HarmonicCoefficients::zeros(lmax);
    let mut i = 0;
    for m in 0..=lmax {
        for c in &cl[m..=lmax] {
            let value = if m == 0 {
                let g: f64 = rng.sample(StandardNormal);
                Complex64::new(c.sqrt() * g, 0.0)
            } else {
                let s = (0.5 * c).sqrt();
                let re: f64 = rng.sample(StandardNormal);
                let im: f64 = rng.sample(StandardNormal);
                Complex64::new(s * re, s * im)
            };
            alm.data[i] = value;
            i += 1;
        }
    }
    Ok(alm)
}

#[cfg(test)]
mod tests {
    use super::*;

    // healpy 1.20.1 Alm.getidx(lmax=4, l, m) = m*(2*lmax+1-m)//2 + l: (4,4) -> 14, (2,1) -> 6.
    #[test]
    fn index_follows_healpy_m_major_order() {
        let a = HarmonicCoefficients::zeros(4);
        assert_eq!(a.index(0, 0), 0);
        assert_eq!(a.index(4, 0), 4);
        assert_eq!(a.index(1, 1), 5);
        assert_eq!(a.index(2, 1), 6);
        assert_eq!(a.index(4, 4), 14);
        assert_eq!(a.as_slice().len(), 15);
    }

    // Definition of Cℓ (healpy alm2cl): one coefficient set by hand.
    #[test]
    fn power_spectrum_counts_positive_m_twice() {
        let mut a = HarmonicCoefficients::zeros(2);
        a.set(2, 0, Complex64::new(1.0, 0.0));
        a.set(2, 1, Complex64::new(0.0, 2.0));
        a.set(2, 2, Complex64::new(1.0, 1.0));
        let cl = a.power_spectrum();
        assert!((cl[2] - (1.0 + 2.0 * 4.0 + 2.0 * 2.0) / 5.0).abs() < 1e-15);
        assert_eq!(cl[0], 0.0);
    }

    // gauss_beam: b_ℓ = exp(−ℓ(ℓ+1)σ²/2); at FWHM = 1° and ℓ = 100 the value is
    // exp(−100·101·(0.0174533/2.35482)²/2) = 0.7578 (computed from the formula).
    #[test]
    fn gaussian_beam_matches_formula_at_one_degree() {
        let b = gaussian_beam(1f64.to_radians(), 100).unwrap();
        let sigma = 1f64.to_radians() / (8.0 * 2f64.ln()).sqrt();
        assert!((b[100] - (-0.5 * 10100.0 * sigma * sigma).exp()).abs() < 1e-15);
        assert!((b[100] - 0.7578).abs() < 1e-3);
        assert_eq!(b[0], 1.0);
        assert!(gaussian_beam(-1.0, 10).is_err());
    }

    #[test]
    fn negative_spectrum_is_rejected() {
        let mut rng = rand::thread_rng();
        assert!(alm_from_cl(&[1.0, -1.0], 1, &mut rng).is_err());
        assert!(alm_from_cl(&[1.0], 1, &mut rng).is_err());
    }
}
