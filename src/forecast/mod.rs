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
//! Every reduction runs sequentially in a fixed order (rows in order, then columns), so the
//! results are bitwise reproducible. Linear algebra goes through nalgebra.

pub mod covariance;
pub mod derivative;
pub mod ellipse;
pub mod ensemble;
pub mod fisher;
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
