//! Shape-noise realisations from the data: each galaxy's ellipticity turned by a random angle,
//! e → e·exp(2iα) with α uniform in [0, π), which keeps |e| and every position but destroys the
//! lensing signal, so maps binned from rotated catalogues sample the shape noise of the survey
//! itself (common practice in weak-lensing analyses).
//!
//! The angle of catalogue row r in realisation k is fixed by (seed, k, r) alone: the 64-bit word
//! r of the ChaCha8 stream (rand_chacha; word position 2r in 32-bit words) keyed by
//! [`sky_seed`]`(seed, k)`, the key the simulated skies use. ChaCha is a counter-based generator,
//! so any block of rows finds its angles by jumping to its first row: the angles do not depend on
//! how the catalogue is cut into blocks, on the thread count, or on which rows are left out.

use crate::simulate::skies::sky_seed;
use rand::{RngCore, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

/// The rotation angles of consecutive rows of one noise realisation.
#[derive(Debug, Clone)]
pub struct RotationAngles {
    rng: ChaCha8Rng,
}

impl RotationAngles {
    /// The angles of realisation `realisation` from catalogue row `first_row` on.
    pub fn new(seed: u64, realisation: u64, first_row: u64) -> Self {
        let mut rng = ChaCha8Rng::seed_from_u64(sky_seed(seed, realisation));
        rng.set_word_pos(2 * first_row as u128);
        RotationAngles { rng }
    }

    /// The next row's angle α = π·u, u = (53 high bits of the word)·2⁻⁵³ ∈ [0, 1).
    #[inline]
    pub fn next_angle(&mut self) -> f64 {
        let u = (self.rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64);
        PI * u
    }
}

/// e·exp(2iα): (e1 cos 2α − e2 sin 2α, e1 sin 2α + e2 cos 2α), the spin-2 rotation of an
/// ellipticity by α (Bartelmann & Schneider 2001, Phys. Rep. 340, 291, §4.2).
///
/// # Examples
///
/// A quarter turn (α = π/4) maps (e1, e2) to (−e2, e1); |e| is kept (worked by hand):
///
/// ```
/// use planisphere::catalogue::rotation::rotate_ellipticity;
/// let (a, b) = rotate_ellipticity(0.3, 0.1, std::f64::consts::FRAC_PI_4);
/// assert!((a + 0.1).abs() < 1e-15 && (b - 0.3).abs() < 1e-15);
/// ```
#[inline]
pub fn rotate_ellipticity(e1: f64, e2: f64, alpha: f64) -> (f64, f64) {
    let (s, c) = (2.0 * alpha).sin_cos();
    (e1 * c - e2 * s, e1 * s + e2 * c)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn angles_of_a_row_do_not_depend_on_where_the_block_starts() {
        let mut whole = RotationAngles::new(7, 3, 0);
        let all: Vec<f64> = (0..100).map(|_| whole.next_angle()).collect();
        let mut tail = RotationAngles::new(7, 3, 37);
        for a in &all[37..] {
            assert_eq!(tail.next_angle().to_bits(), a.to_bits());
        }
        let mut other = RotationAngles::new(7, 4, 0);
        assert_ne!(other.next_angle().to_bits(), all[0].to_bits());
        assert!(all.iter().all(|&a| (0.0..PI).contains(&a)));
    }
}
