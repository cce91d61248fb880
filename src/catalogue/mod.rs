//! Galaxy catalogues turned into sky maps: a lensing survey's galaxies, with positions and
//! measured ellipticities, read from CSV or FITS tables in blocks, screened row by row, and
//! binned into HEALPix maps of counts, mean shear, shape-noise variance, density contrast and
//! footprint; shape-noise realisations by random rotation of each galaxy.
//!
//! Owns: the catalogue readers ([`CatalogueSource`], [`CatalogueColumns`]), the row checks and
//! their report ([`screening`]), the binning ([`CatalogueBinner`], [`bin_catalogue`]), the
//! rotation angles of noise realisations ([`rotation`], [`noise_realisation`]), the κ_E, κ_B
//! maps of the binned shear on the footprint ([`convergence`]), one noise map per realisation for
//! ensembles ([`noise_maps`]), the maps file ([`maps_file`]) and mock catalogues of a
//! convergence map ([`mock`]).
//!
//! Sits at the sky-map level of the pipeline: what it makes are HEALPix maps that every later
//! stage takes as input. May use: [`crate::sky`] (pixels, maps, footprints), [`crate::io`]
//! (FITS tables and HEALPix FITS files), [`crate::simulate`] (the seed mixing of random streams),
//! [`crate::harmonics`] (spin-2 transforms for mass maps) and the crate's foundations
//! ([`crate::error`], [`crate::files`], [`crate::limits`]). Nothing in the pipeline before it
//! uses it.

pub mod binning;
pub mod convergence;
pub mod maps_file;
pub mod mock;
pub mod noise_maps;
pub mod rotation;
pub mod screening;
pub mod source;

pub use binning::{
    bin_catalogue, noise_realisation, BinningPlan, CatalogueBinner, CatalogueMaps, NoiseMaps,
    NoiseRealisations,
};
pub use screening::{GalaxyBlock, RowProblem, ScreeningReport};
pub use source::{CatalogueColumns, CatalogueFormat, CatalogueSource, WeightChoice};
