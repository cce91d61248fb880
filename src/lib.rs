//! planisphere: wavelet scattering statistics of HEALPix sky maps on masked survey footprints.
//!
//! The modules follow the data flow of the method: sky map → tiling → patch sampling →
//! apodization → filters → transform → pooling → statistics → forecast. See DEVELOPERS.md.

pub mod apodization;
pub mod charts;
pub mod cli;
pub mod correlation;
pub mod ensemble;
pub mod error;
pub mod files;
pub mod filters;
pub mod fits_io;
pub mod flat;
pub mod flat_comparison;
pub mod footprint;
pub mod forecast;
pub mod harmonics;
pub mod limits;
pub mod measurement;
pub mod measurement_document;
pub mod mode_coupling;
pub mod pixelization;
pub mod plotting;
pub mod pooling;
pub mod projection;
pub mod sampling;
pub mod scenario;
pub mod skies;
pub mod skymap;
pub mod spectra;
pub mod spectrum;
pub mod statistics;
pub mod synthesis;
pub mod tile_spectra;
pub mod tiling;
pub mod transform;
pub mod wigner;

pub use error::{Error, Result};
pub use footprint::Footprint;
pub use pixelization::{Direction, Ordering, Pixelization};
pub use skymap::{SkyMap, SkyMapOf};
