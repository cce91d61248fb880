//! Measuring maps: a HEALPix map on its footprint through tangent-plane tiles (with the tile
//! power spectrum and bispectrum on the same tiles), flat plane maps, and the comparison of the
//! sphere's answer with the flat-sky one.
//!
//! Owns: the user's measurement choices ([`MeasurementChoices`], flags, settings file and Python
//! keywords in one type), [`MeasurementSettings`] and [`SphereMeasurer`] with their results ([`MapStatistics`],
//! [`PairStatistics`]), one statistic tile by tile ([`TileStatistic`]), the tile Fourier
//! statistics ([`TilePowerSpectrum`], [`TileBispectrum`], [`WavenumberBins`]), [`FlatMap`] and
//! the flat comparison ([`FlatComparison`]).
//!
//! May use: [`crate::sky`], [`crate::harmonics`], [`crate::simulate`] (the skies of the flat
//! comparison), [`crate::tiles`], [`crate::scattering`] and the crate's foundations.

pub mod flat;
pub mod flat_comparison;
pub mod measurement;
pub mod settings;
pub mod tile_spectra;
pub mod tile_statistic;

pub use flat::FlatMap;
pub use flat_comparison::{FlatComparison, FlatComparisonSettings};
pub use measurement::{MapStatistics, MeasurementSettings, PairStatistics, SphereMeasurer};
pub use settings::MeasurementChoices;
pub use tile_spectra::{TileBispectrum, TilePowerSpectrum, WavenumberBins};
pub use tile_statistic::TileStatistic;
