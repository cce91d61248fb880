//! Spherical harmonic transforms on the HEALPix RING grid: ring geometry, a_ℓm storage and
//! spectra, synthesis (a_ℓm → map) and analysis (map → a_ℓm, with Jacobi iterations), Gaussian
//! random coefficients and Gaussian beam smoothing; spin-weighted (spin-2: Q/U, shear) synthesis and
//! analysis ([`SpinTransform`]) and full-sky Kaiser–Squires mass mapping ([`mass_mapping`]). Conventions are healpy's (healpy 1.20.1):
//! m-major a_ℓm order, Y_ℓm with the Condon–Shortley phase, equal-weight quadrature.
//!
//! Owns, besides the transforms: angular power spectra as inputs ([`spectrum`]: text tables and
//! built-in models), measured spectra of maps ([`spectra`]: full-sky C_ℓ, pseudo-C_ℓ, MASTER),
//! the mode-coupling matrix ([`mode_coupling`]), Wigner 3j symbols ([`wigner`]) and the
//! correlation function ↔ spectrum pair ([`correlation`]).
//!
//! May use: [`crate::sky`] and the crate's foundations ([`crate::error`], [`crate::files`],
//! [`crate::limits`]).

mod coefficients;
pub mod correlation;
mod geometry;
mod legendre;
pub mod mass_mapping;
pub mod mode_coupling;
pub mod spectra;
pub mod spectrum;
mod spin_transform;
mod transform;
pub mod wigner;

pub use coefficients::{alm_from_cl, coefficient_count, gaussian_beam, HarmonicCoefficients};
pub use correlation::LognormalSpectrum;
pub use geometry::{Ring, RingGeometry};
pub use mass_mapping::{
    convergence_from_shear, ConvergenceMaps, MassMapper, MassMappingSettings, ShearAxes,
};
pub use mode_coupling::{Binning, CouplingMatrix, MasterDeconvolution};
pub use spectra::{MasterSettings, MasterSpectrum, MeasuredSpectrum, PseudoSpectrum};
pub use spectrum::AngularSpectrum;
pub use spin_transform::SpinTransform;
pub use transform::{HarmonicTransform, LegendreKernel, DEFAULT_ANALYSIS_ITERATIONS};
