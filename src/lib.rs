//! planisphere: wavelet scattering statistics of HEALPix sky maps on masked survey footprints.
//!
//! The modules follow the data flow of the method: sky map → tiling → patch sampling →
//! apodization → filters → transform → pooling → statistics → forecast. See DEVELOPERS.md.

pub mod error;

pub use error::{Error, Result};
pub mod footprint;
pub mod pixelization;
pub mod plotting;
pub mod projection;
pub mod sampling;
pub mod skymap;
pub mod tiling;

pub use footprint::Footprint;
pub use pixelization::{Direction, Ordering, Pixelization};
pub use skymap::SkyMap;
pub mod cli;
