//! planisphere: wavelet scattering statistics of HEALPix sky maps on masked survey footprints.
//!
//! Measure a simulated sky on a tapered cap in a few lines:
//!
//! ```
//! use planisphere::sky::apodization::{apodize, TaperKind};
//! use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
//! use planisphere::{harmonics::spectrum::AngularSpectrum, simulate::skies::SkyRecipe};
//! use planisphere::{Direction, Footprint, Ordering, Pixelization};
//!
//! let pix = Pixelization::new(32, Ordering::Ring)?;
//! // Sky 0 of a seeded Gaussian ensemble with the built-in demo spectrum (unit variance).
//! let recipe = SkyRecipe::gaussian(32, AngularSpectrum::demo_model(95, 1.0), 7);
//! let map = recipe.realise(&recipe.transform()?, 0)?;
//! // A 30° cap, C2-apodized over 4°.
//! let centre = Direction::from_lonlat_deg(40.0, 30.0);
//! let cap = Footprint::from_fn(pix, |d| d.distance(&centre) < 30f64.to_radians());
//! let footprint = apodize(&cap, TaperKind::C2, 4f64.to_radians())?;
//! // J = 3 scales, L = 4 orientations, 32-pixel tiles with a 4-pixel border ramp.
//! let settings = MeasurementSettings {
//!     scales: 3,
//!     tile_pixels: Some(32),
//!     border_pixels: 4,
//!     bispectrum: false,
//!     ..MeasurementSettings::default()
//! };
//! let measurer = SphereMeasurer::new(pix, &footprint, settings)?;
//! let statistics = measurer.measure(&map, &footprint)?;
//! let s1 = statistics.coefficients.first_order(2, 0);
//! let p = statistics.coefficients.band_power(2, 0);
//! let ratio = s1.value * s1.value / p.value;
//! println!("{} tiles: S1(2, 0) = {:.4}, S1²/P = {ratio:.4}", statistics.tiles, s1.value);
//! // A Gaussian field's wavelet modulus is Rayleigh distributed, so S1²/P ≈ π/4 ≈ 0.785
//! // (Rayleigh distribution; `tests/sphere_gaussian_ratio.rs` holds the precise check).
//! assert!(s1.trusted && (ratio - std::f64::consts::FRAC_PI_4).abs() < 0.05);
//! # Ok::<(), planisphere::Error>(())
//! ```
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
//! | [`catalogue`]     | galaxy catalogues binned into shear, density and footprint maps       |
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
//! The old flat module paths (`planisphere::scattering::transform`, `planisphere::sky::skymap`, ...) are not kept
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

pub mod catalogue;

pub mod ensemble;

pub mod forecast;

pub mod synthesis;

pub mod figures;

pub mod cli;

pub use error::{Error, Result};
pub use sky::{Direction, Footprint, FootprintOf, Ordering, Pixelization, SkyMap, SkyMapOf};
