//! planisphere: wavelet scattering statistics of HEALPix sky maps on masked survey footprints.
//!
//! The modules follow the data flow of the method: sky map → tiling → patch sampling →
//! apodization → filters → transform → pooling → statistics → forecast. See DEVELOPERS.md.

pub mod error;
pub mod filters;
pub mod flat;
pub mod pooling;
pub mod statistics;
pub mod transform;

pub use error::{Error, Result};
