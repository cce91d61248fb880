//! From the sphere to the plane: the gnomonic projection, the tiling of a footprint by
//! tangent-plane tiles, and the sampling of a map onto tile grids (and back).
//!
//! Owns: [`Gnomonic`], the tiling plan ([`TilingPlan`], [`TilingSettings`], [`Tile`]), the
//! tile sampler ([`TileSampler`], [`SamplingMethod`]) and the map pixels the tiles read
//! ([`reach::read_ranges`]).
//!
//! May use: [`crate::sky`] and the crate's foundations ([`crate::error`], [`crate::limits`]). It
//! knows nothing of filters or coefficients: the tile sizes it picks are those of
//! [`crate::limits::is_tile_size`].

pub mod projection;
pub mod reach;
pub mod sampling;
pub mod tiling;

pub use projection::Gnomonic;
pub use sampling::{SamplingMethod, TileSampler};
pub use tiling::{Tile, TilingPlan, TilingSettings};
