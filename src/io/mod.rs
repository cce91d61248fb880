//! Files in the formats the pipeline reads and writes: HEALPix maps and footprints in FITS, FITS
//! binary tables (galaxy catalogues), and the JSON document of a measurement.
//!
//! Owns: the FITS reader and writer ([`read_map`], [`read_footprint`], [`write_map`],
//! [`HealpixFitsReader`], [`WriteOptions`]), the reading of a mask and map by blocks at the
//! footprint's size ([`footprint_read`]), plain binary tables read by blocks of rows
//! ([`fits_table::FitsTable`]) and the measurement document
//! ([`measurement_document()`], [`pair_document`], [`flat_measurement_document`]).
//!
//! May use: [`crate::sky`], [`crate::scattering`], [`crate::measure`] and the crate's
//! foundations. The safe writing of any file (temporary file renamed into place) is not here but
//! in [`crate::files`], which every stage uses.

pub mod fits_io;
pub mod fits_table;
pub mod footprint_read;
pub mod measurement_document;

pub use fits_io::{
    read_footprint, read_map, write_footprint, write_map, HealpixFitsReader, WriteOptions,
};
pub use measurement_document::{flat_measurement_document, measurement_document, pair_document};
