//! The sky: HEALPix pixel geometry, sky maps, survey footprints, the apodization of a footprint
//! into a smooth taper, and the check that a map has anything to measure.
//!
//! Owns: [`Pixelization`] (NSIDE, RING/NESTED, directions), [`SkyMap`], the map held by
//! blocks ([`block_map::BlockSkyMap`]), [`Footprint`], [`TaperKind`] and the apodization of
//! masks.
//!
//! May use: only the crate's foundations ([`crate::error`], [`crate::limits`]). Every later
//! stage of the pipeline builds on this one.

pub mod apodization;
pub mod block_map;
pub mod footprint;
pub mod measurable;
pub mod pixelization;
pub mod skymap;
pub mod valid_pixels;

pub use apodization::{apodize, TaperKind};
pub use footprint::{Footprint, FootprintOf};
pub use measurable::check_measurable;
pub use pixelization::{Direction, Ordering, Pixelization};
pub use skymap::{SkyMap, SkyMapOf};
