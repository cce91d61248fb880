//! Simulated inputs: Gaussian and shifted-lognormal skies of a given angular spectrum, and the
//! built-in demo scenario (a mock footprint and a synthetic sky, of our own invention).
//!
//! Owns: [`SkyRecipe`] and [`SkyOptions`] (what to simulate), [`SpectrumChoice`] and the demo's
//! [`MockFootprint`].
//!
//! May use: [`crate::sky`], [`crate::harmonics`] and the crate's foundations.

pub mod scenario;
pub mod skies;

pub use scenario::{benchmark_survey_mask, MockFootprint};
pub use skies::{SkyOptions, SkyRecipe, SpectrumChoice};
