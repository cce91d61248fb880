//! Spherical harmonic transforms on the HEALPix RING grid: ring geometry, a_ℓm storage and
//! spectra, synthesis (a_ℓm → map) and analysis (map → a_ℓm, with Jacobi iterations), Gaussian
//! random coefficients and Gaussian beam smoothing. Conventions are healpy's (healpy 1.20.1):
//! m-major a_ℓm order, Y_ℓm with the Condon–Shortley phase, equal-weight quadrature.

mod coefficients;
mod geometry;
mod legendre;
mod transform;

pub use coefficients::{alm_from_cl, coefficient_count, gaussian_beam, HarmonicCoefficients};
pub use geometry::{Ring, RingGeometry};
pub use transform::{HarmonicTransform, LegendreKernel, DEFAULT_ANALYSIS_ITERATIONS};
