//! planisphere: wavelet scattering statistics of HEALPix sky maps on masked survey footprints.
//!
//! Measure a simulated sky on a tapered cap in a few lines:
//!
//! ```
//! use planisphere::apodization::{apodize, TaperKind};
//! use planisphere::measurement::{MeasurementSettings, SphereMeasurer};
//! use planisphere::{skies::SkyRecipe, spectrum::AngularSpectrum};
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
//! The modules follow the data flow of the method:
//!
//! 1. **sky map**: [`pixelization`] (HEALPix geometry), [`skymap`] (values and valid pixels),
//!    [`footprint`] (masks and weights), [`fits_io`] (HEALPix FITS files), [`skies`] (simulated
//!    skies), [`harmonics`], [`spectra`] and [`mode_coupling`] (spherical harmonics, C_ℓ,
//!    pseudo-C_ℓ and MASTER);
//! 2. **tiles**: [`projection`] (the gnomonic projection) and [`tiling`] (the plan of tiles);
//! 3. **sampling**: [`sampling`] (sky → tile grids);
//! 4. **apodization**: [`apodization`] (mask tapers);
//! 5. **filters**: [`filters`] (the Morlet bank);
//! 6. **transform**: [`transform`] (the per-tile scattering transform and its engine);
//! 7. **pooling**: [`pooling`] (weighted sums over tiles);
//! 8. **statistics**: [`statistics`] (labels, full set, orientation-harmonic summary),
//!    [`measurement`] (one map on its footprint), [`tile_spectra`], [`measurement_document`];
//! 9. **ensemble**: [`ensemble`] (ensemble directories of simulations or maps);
//! 10. **forecast**: [`forecast`] (covariance with the Hartlap factor, derivatives, Fisher).
//!
//! Beside the chain: [`synthesis`] (maps with given statistics), [`flat`] and
//! [`flat_comparison`] (flat-sky fields and the flat-sky benchmark), [`charts`] and [`plotting`]
//! (figures). The contributor guide (DEVELOPERS.md) says where each change goes.

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
pub use skymap::SkyMap;
