//! Statistics of simulation ensembles and Fisher forecasts.
//!
//! The input is plain: an [`Ensemble`] is a matrix whose rows are simulations and whose columns
//! are summary statistics (scattering coefficients, band powers, spectra, ...), each column with a
//! [`ColumnLabel`]. From ensembles this module builds
//!
//! - the sample mean, covariance and correlation, and the Hartlap-corrected precision matrix
//!   ([`covariance`]);
//! - finite-difference derivatives of the mean with respect to parameters, with the noise they
//!   carry ([`derivative`]);
//! - Fisher matrices, marginalised and conditional errors, and the bias that noisy derivatives add
//!   to the Fisher matrix ([`fisher`]);
//! - confidence ellipses for pairs of parameters ([`ellipse`]);
//! - named subsets of statistics, scale cuts, and the comparison of forecasts between subsets
//!   ([`statistic_set`]).
//!
//! A forecast in a few lines (two statistics, one parameter θ with d = (θ, 2θ) + noise):
//!
//! ```
//! use planisphere::forecast::{
//!     ColumnLabel, CovarianceEstimate, Ensemble, FiniteDifference, FisherForecast,
//! };
//! let labels = vec![ColumnLabel::new("a"), ColumnLabel::new("b")];
//! let noise = [[0.1, -0.2], [-0.3, 0.1], [0.2, 0.3], [0.0, -0.1], [-0.1, 0.0], [0.1, -0.1]];
//! let at = |theta: f64| -> Vec<Vec<f64>> {
//!     noise.iter().map(|n| vec![theta + n[0], 2.0 * theta + n[1]]).collect()
//! };
//! let fiducial = Ensemble::from_rows(labels.clone(), &at(1.0))?;
//! let precision = CovarianceEstimate::from_ensemble(&fiducial)?.precision()?;
//! // Same noise rows at θ ± Δ: paired seeds, so the derivative is exact here.
//! let plus = Ensemble::from_rows(labels.clone(), &at(1.1))?;
//! let minus = Ensemble::from_rows(labels, &at(0.9))?;
//! let d = FiniteDifference::from_sets("theta", 0.1, &plus, &minus, true)?;
//! assert!((d.derivative[1] - 2.0).abs() < 1e-12);
//! let forecast = FisherForecast::from_derivatives(&precision, &[d])?;
//! println!("σ(θ) = {}", forecast.marginalised_errors[0]);
//! assert!(!forecast.warnings.is_empty()); // n = 6, p = 2: Hartlap factor 0.4 < 0.8
//! # Ok::<(), planisphere::Error>(())
//! ```
//!
//! Every reduction runs sequentially in a fixed order (rows in order, then columns), so the
//! results are bitwise reproducible. Linear algebra goes through nalgebra.

pub mod covariance;
pub mod derivative;
pub mod ellipse;
pub mod ensemble;
pub mod fisher;
pub mod named_sets;
pub mod statistic_set;

pub use covariance::{hartlap_factor, CovarianceEstimate, Precision};
pub use derivative::FiniteDifference;
pub use ellipse::{ellipse_scale, ConfidenceEllipse, ConfidenceLevel};
pub use ensemble::{ColumnLabel, Ensemble};
pub use fisher::FisherForecast;
pub use statistic_set::{
    compare_statistic_sets, DerivativeEnsembles, ScaleCut, SetComparison, SetComparisonRow,
    StatisticSet,
};
