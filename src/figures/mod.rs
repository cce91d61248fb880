//! Pictures: x–y charts (line and point series, panels, confidence ellipses) and sky pictures
//! in the Mollweide projection, rendered in memory and written as PNG or SVG.
//!
//! Owns: [`Figure`] and its parts (panels, series, axes) and [`SkyPicture`].
//!
//! May use: [`crate::sky`] and the crate's foundations ([`crate::error`], [`crate::files`]).
//! Pictures are plain data handed in by the caller, so no stage of the pipeline is needed here.

pub mod charts;
pub mod plotting;

pub use charts::{Figure, ImageFormat, Panel, Series};
pub use plotting::SkyPicture;
