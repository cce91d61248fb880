//! The scattering transform of square plane grids: the 2-D FFTs of square grids, the Morlet
//! filter bank, the engine that transforms one tile (and owns the FFT plans and the bank), the
//! weighted pooling of per-tile sums, and the labelled coefficients with their
//! orientation-harmonic summary.
//!
//! Owns: the square-grid FFTs and the signed-frequency folding ([`fft`]: [`SquareFft`],
//! [`SquareFftPlanner`]; also used by `measure` and `synthesis`), [`MorletBank`],
//! [`ScatteringEngine`] and [`TransformSettings`], the tile views ([`TileView`],
//! [`TilePairView`]), the per-tile sums ([`TileSums`]) and the coefficient sets
//! ([`CoefficientSet`], [`CrossCoefficientSet`], [`OrientationSummary`]) with the one layout
//! and naming of the full set ([`CoefficientLayout`], [`CoefficientSpelling`]).
//!
//! May use: only the crate's foundations ([`crate::error`], [`crate::limits`]). Nothing here
//! knows the sphere: a tile is a plane grid with a taper and a pooling weight.

pub mod fft;
pub mod filters;
pub mod layout;
pub mod pooling;
pub mod statistics;
pub mod transform;

pub use fft::{SquareFft, SquareFftPlanner};
pub use filters::MorletBank;
pub use layout::{CoefficientLayout, CoefficientSpelling, WaveletPath};
pub use pooling::TileSums;
pub use statistics::{
    CoefficientKind, CoefficientLabel, CoefficientSet, CrossCoefficientSet, OrientationSummary,
};
pub use transform::{ScatteringEngine, TilePairView, TileView, TransformSettings};
