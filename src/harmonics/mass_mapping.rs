//! Full-sky Kaiser–Squires mass mapping: weak-lensing shear maps γ1, γ2 → convergence maps
//! κ_E, κ_B on the HEALPix RING grid, and the forward model κ → γ.
//!
//! **Relations** (Kaiser & Squires 1993, ApJ 404, 441, on the plane; on the sphere with the
//! spin-raising operator ð, e.g. Castro, Heavens & Kitching 2005, PRD 72, 023516, and Wallis et
//! al. 2017, arXiv:1703.09233, §2; from memory): with the lensing potential ψ,
//! γ = γ1 + iγ2 = ½ ð ð ψ and κ = ½ ð̄ ð ψ, so in harmonic space (ð ð Y_ℓm =
//! √((ℓ+2)!/(ℓ−2)!) ₂Y_ℓm, ð̄ ð Y_ℓm = −ℓ(ℓ+1) Y_ℓm)
//!
//! γ_ℓm = −√((ℓ+2)(ℓ−1)/(ℓ(ℓ+1))) κ_ℓm,  κ_ℓm = −√(ℓ(ℓ+1)/((ℓ+2)(ℓ−1))) γ_ℓm,  ℓ ≥ 2,
//!
//! applied to the E and B parts separately: κ_E,ℓm = −√(ℓ(ℓ+1)/((ℓ+2)(ℓ−1))) γ_E,ℓm and
//! κ_B,ℓm likewise, with ℓ < 2 set to zero (the monopole and dipole of κ are not constrained by
//! shear). Here γ_E,ℓm, γ_B,ℓm are the E and B coefficients of [`SpinTransform`] (healpy
//! 1.20.1 `map2alm_spin([γ1, γ2], 2, lmax)`) of the maps taken as Q = γ1, U = γ2 — see the
//! axes below for why the signs come out this way. Optional smoothing multiplies by a Gaussian
//! beam b_ℓ = exp(−ℓ(ℓ+1)σ²/2), σ = FWHM/√(8 ln 2) ([`super::gaussian_beam`]).
//!
//! **Axes** (the sign conventions, checked in tests/mass_mapping_lensing_potential.rs against
//! the shear of a known potential): maps are in celestial (or any) longitude/latitude
//! coordinates, RA = φ, Dec = 90° − θ. With [`ShearAxes::EastNorth`] (the default), γ1 > 0
//! stretches an image along RA (east–west) and γ2 > 0 along the diagonal between increasing RA
//! and increasing Dec: γ1 = ½(ψ_xx − ψ_yy), γ2 = ψ_xy with x = east, y = north (common practice
//! in weak lensing: e1 along RA/Dec). The HEALPix spin-2 basis (e_θ, e_φ) = (south, east) is that
//! frame turned by −90°, so the spin-2 field on healpy's basis is −(γ1 + iγ2): in healpy's
//! default "COSMO" polarization convention Q = −γ1, U = −γ2; in the "IAU" convention (U of the
//! opposite sign) Q = −γ1, U = γ2. The overall sign flips E and B together, which the sign of
//! the kernel above absorbs: κ from (Q = γ1, U = γ2) with κ = −√(…) γ_E is the same as κ from
//! the COSMO maps (−γ1, −γ2) with +√(…). [`ShearAxes::WestNorth`] takes x = west (decreasing
//! RA, east to the left as on a sky image), y = north: the mirror image, γ2 of the opposite sign
//! (the flip between the two, and between COSMO and IAU U).

use super::coefficients::{gaussian_beam, HarmonicCoefficients};
use super::spin_transform::SpinTransform;
use super::transform::DEFAULT_ANALYSIS_ITERATIONS;
use crate::error::{Error, Result};

/// The axes γ1 and γ2 refer to (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ShearAxes {
    /// x = increasing RA (east), y = increasing Dec (north): γ1 > 0 along RA, γ2 > 0 along the
    /// diagonal between increasing RA and increasing Dec.
    #[default]
    EastNorth,
    /// x = decreasing RA (west), y = north: γ2 of the opposite sign to `EastNorth`.
    WestNorth,
}

impl ShearAxes {
    /// Sign that turns γ2 on these axes into γ2 on `EastNorth` axes (and back).
    fn gamma2_sign(self) -> f64 {
        match self {
            ShearAxes::EastNorth => 1.0,
            ShearAxes::WestNorth => -1.0,
        }
    }
}

/// Choices of a mass map.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MassMappingSettings {
    /// Full width at half maximum of the Gaussian smoothing, arcminutes (0: none).
    pub smoothing_fwhm_arcmin: f64,
    /// Axes of γ1, γ2.
    pub axes: ShearAxes,
    /// Jacobi iterations of the spin-2 analysis (healpy's default for map2alm is 3).
    pub iterations: usize,
}

impl Default for MassMappingSettings {
    fn default() -> Self {
        MassMappingSettings {
            smoothing_fwhm_arcmin: 0.0,
            axes: ShearAxes::EastNorth,
            iterations: DEFAULT_ANALYSIS_ITERATIONS,
        }
    }
}

/// The E-mode convergence (the mass map) and the B-mode one (a null test: zero for pure
/// lensing), RING order.
#[derive(Debug, Clone, PartialEq)]
pub struct ConvergenceMaps {
    pub e: Vec<f64>,
    pub b: Vec<f64>,
}

/// Kaiser–Squires factors −√(ℓ(ℓ+1)/((ℓ+2)(ℓ−1))) for ℓ = 0 … lmax (zero for ℓ < 2), γ → κ.
///
/// # Examples
///
/// ℓ = 2: −√(6/4) = −1.2247…; the factor tends to −1 at large ℓ (flat-sky limit).
/// ```
/// let k = planisphere::harmonics::mass_mapping::shear_to_convergence_factors(2);
/// assert_eq!(k[..2], [0.0, 0.0]);
/// assert!((k[2] + 1.5f64.sqrt()).abs() < 1e-15);
/// ```
pub fn shear_to_convergence_factors(lmax: usize) -> Vec<f64> {
    (0..=lmax)
        .map(|l| {
            if l < 2 {
                0.0
            } else {
                let l = l as f64;
                -((l * (l + 1.0)) / ((l + 2.0) * (l - 1.0))).sqrt()
            }
        })
        .collect()
}

/// Inverse factors −√((ℓ+2)(ℓ−1)/(ℓ(ℓ+1))) for ℓ = 0 … lmax (zero for ℓ < 2), κ → γ: the
/// reciprocals of [`shear_to_convergence_factors`].
pub fn convergence_to_shear_factors(lmax: usize) -> Vec<f64> {
    shear_to_convergence_factors(lmax)
        .into_iter()
        .map(|k| if k == 0.0 { 0.0 } else { 1.0 / k })
        .collect()
}

/// Mass mapping for one (Nside, lmax): owns the spin-2 transform (and through it the scalar
/// one), built once and shared for any number of maps (it is `Sync`).
#[derive(Debug)]
pub struct MassMapper {
    spin: SpinTransform,
}

impl MassMapper {
    /// Mapper for maps of `nside` and multipoles up to `lmax`, 2 ≤ lmax ≤ 3·nside − 1.
    pub fn new(nside: usize, lmax: usize) -> Result<Self> {
        if lmax < 2 {
            return Err(Error::Setting(format!(
                "mass mapping needs lmax >= 2 (shear has no l < 2 modes), got {lmax}"
            )));
        }
        Ok(MassMapper {
            spin: SpinTransform::new(nside, lmax, 2)?,
        })
    }

    /// HEALPix resolution parameter.
    pub fn nside(&self) -> usize {
        self.spin.nside()
    }

    /// Largest multipole.
    pub fn lmax(&self) -> usize {
        self.spin.lmax()
    }

    /// κ_E,ℓm and κ_B,ℓm of shear maps (RING order, 12 Nside² pixels each; pixels without
    /// data should hold 0), smoothed if asked.
    pub fn convergence_coefficients(
        &self,
        gamma1: &[f64],
        gamma2: &[f64],
        settings: &MassMappingSettings,
    ) -> Result<(HarmonicCoefficients, HarmonicCoefficients)> {
        let fwhm = settings.smoothing_fwhm_arcmin;
        if !(fwhm.is_finite() && fwhm >= 0.0) {
            return Err(Error::Setting(format!(
                "smoothing FWHM must be a finite number of arcminutes >= 0, got {}",
                crate::error::compact(fwhm)
            )));
        }
        let sign = settings.axes.gamma2_sign();
        let (mut e, mut b) = if sign == 1.0 {
            self.spin.analysis(gamma1, gamma2, settings.iterations)?
        } else {
            let flipped: Vec<f64> = gamma2.iter().map(|g| -g).collect();
            self.spin.analysis(gamma1, &flipped, settings.iterations)?
        };
        let mut kernel = shear_to_convergence_factors(self.lmax());
        if fwhm > 0.0 {
            let beam = gaussian_beam((fwhm / 60.0).to_radians(), self.lmax())?;
            for (k, b) in kernel.iter_mut().zip(&beam) {
                *k *= b;
            }
        }
        e.apply_beam(&kernel)?;
        b.apply_beam(&kernel)?;
        Ok((e, b))
    }

    /// κ_E and κ_B maps of shear maps (see [`MassMapper::convergence_coefficients`]), both
    /// made in one synthesis pass ([`SpinTransform::scalar_pair_synthesis`]).
    pub fn convergence_from_shear(
        &self,
        gamma1: &[f64],
        gamma2: &[f64],
        settings: &MassMappingSettings,
    ) -> Result<ConvergenceMaps> {
        let (e, b) = self.convergence_coefficients(gamma1, gamma2, settings)?;
        let (e, b) = self.spin.scalar_pair_synthesis(&e, &b)?;
        Ok(ConvergenceMaps { e, b })
    }

    /// Shear maps γ1, γ2 on `axes` of a convergence with coefficients `kappa` (its E part;
    /// ℓ < 2 does not contribute): γ_E,ℓm = −√((ℓ+2)(ℓ−1)/(ℓ(ℓ+1))) κ_ℓm, γ_B = 0.
    pub fn shear_from_convergence(
        &self,
        kappa: &HarmonicCoefficients,
        axes: ShearAxes,
    ) -> Result<(Vec<f64>, Vec<f64>)> {
        if kappa.lmax() != self.lmax() {
            return Err(Error::Mismatch(format!(
                "convergence coefficients have lmax {}, the mapper was built for lmax {}",
                kappa.lmax(),
                self.lmax()
            )));
        }
        let mut e = kappa.clone();
        e.apply_beam(&convergence_to_shear_factors(self.lmax()))?;
        let (gamma1, mut gamma2) = self
            .spin
            .synthesis(&e, &HarmonicCoefficients::zeros(self.lmax()))?;
        if axes.gamma2_sign() < 0.0 {
            gamma2.iter_mut().for_each(|g| *g = -*g);
        }
        Ok((gamma1, gamma2))
    }
}

/// κ_E and κ_B maps from shear maps γ1, γ2 (RING order) at `nside` up to `lmax`: builds a
/// [`MassMapper`] (build one and reuse it for many maps).
pub fn convergence_from_shear(
    gamma1: &[f64],
    gamma2: &[f64],
    nside: usize,
    lmax: usize,
    settings: &MassMappingSettings,
) -> Result<ConvergenceMaps> {
    MassMapper::new(nside, lmax)?.convergence_from_shear(gamma1, gamma2, settings)
}
