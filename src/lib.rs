//! planisphere: wavelet scattering statistics of HEALPix sky maps on masked survey footprints.
//!
//! # Layout
//!
//! The folders follow the data flow of the method, and each may use only the folders above it
//! in this list (its module doc says which); dependencies point one way, down the pipeline:
//!
//! | folder            | owns                                                                  |
//! |-------------------|-----------------------------------------------------------------------|
//! | [`sky`]           | pixelization, sky maps, footprints, apodization                       |
//! | [`harmonics`]     | spherical harmonic transforms, input and measured spectra, MASTER     |
//! | [`simulate`]      | Gaussian and lognormal skies, the demo scenario                       |
//! | [`tiles`]         | gnomonic projection, the tiling plan, sampling onto tile grids        |
//! | [`scattering`]    | filter bank, the engine (one tile's transform), pooling, coefficients |
//! | [`measure`]       | a map measured on its footprint, tile spectra, flat maps              |
//! | [`io`]            | HEALPix FITS files, the measurement document                          |
//! | [`ensemble`]      | statistics vectors of many maps, resumable and sharded                |
//! | [`forecast`]      | covariances and Fisher forecasts from ensembles                       |
//! | [`synthesis`]     | fields and maps whose statistics match a target                       |
//! | [`figures`]       | charts and sky pictures                                               |
//! | [`cli`]           | the command line: argument parsing and printing only                  |
//!
//! `scattering`, `ensemble`, `forecast` and `figures` need little or nothing of the stages
//! before them (a tile is a plane grid; an ensemble is a table), which their module docs state.
//! Three foundations sit at the top and may be used by every folder: [`error`] (the one error
//! type), [`files`] (safe reading and atomic writing of any file) and [`limits`] (the sizes and
//! counts a user may ask for). No module outside [`cli`] uses the command line.
//!
//! The old flat module paths (`planisphere::transform`, `planisphere::skymap`, ...) are not kept
//! as aliases: each module has one path, inside its folder. The crate root re-exports only the
//! error type and the sky types below. See DEVELOPERS.md.

pub mod error;
pub mod files;
pub mod limits;

pub mod sky;

pub mod harmonics;

pub mod simulate;

pub mod tiles;

pub mod scattering;

pub mod measure;

pub mod io;

pub mod ensemble;

pub mod forecast;

pub mod synthesis;

pub mod figures;

pub mod cli;

pub use error::{Error, Result};
pub use sky::{Direction, Footprint, Ordering, Pixelization, SkyMap, SkyMapOf};
