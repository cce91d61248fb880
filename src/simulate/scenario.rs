//! The built-in demo scenario, of our own invention: a mock survey footprint (a galactic-cut-like
//! band with circular holes around mock bright stars) and a synthetic sky to measure on it.
//! Nothing here comes from real data; it exists so that `planisphere demo` runs with no input.

use crate::sky::footprint::Footprint;
use crate::sky::pixelization::{Direction, Pixelization};
use crate::sky::skymap::SkyMap;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

/// Settings of the mock footprint.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct MockFootprint {
    /// Pixels with |latitude| below this (degrees) are cut, like a galactic-plane cut.
    pub latitude_cut_deg: f64,
    /// Number of circular holes around mock bright stars.
    pub star_holes: usize,
    /// Smallest and largest hole radius in degrees.
    pub hole_radius_deg: (f64, f64),
    /// Seed of the hole positions.
    pub seed: u64,
}

impl Default for MockFootprint {
    fn default() -> Self {
        MockFootprint {
            latitude_cut_deg: 20.0,
            star_holes: 60,
            hole_radius_deg: (0.5, 2.0),
            seed: 7,
        }
    }
}

impl MockFootprint {
    /// The binary footprint at `pixelization`.
    pub fn build(&self, pixelization: Pixelization) -> Footprint {
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
        let holes: Vec<([f64; 3], f64)> = (0..self.star_holes)
            .map(|_| {
                let z: f64 = rng.gen_range(-1.0..1.0);
                let phi: f64 = rng.gen_range(0.0..2.0 * PI);
                let r = rng.gen_range(self.hole_radius_deg.0..=self.hole_radius_deg.1);
                let dir = Direction::new(z.acos(), phi).to_vector();
                (dir, r.to_radians().cos())
            })
            .collect();
        let cut = self.latitude_cut_deg.to_radians();
        Footprint::from_fn(pixelization, |d| {
            if d.lat().abs() < cut {
                return false;
            }
            let v = d.to_vector();
            !holes
                .iter()
                .any(|(h, cos_r)| v[0] * h[0] + v[1] * h[1] + v[2] * h[2] > *cos_r)
        })
    }
}

/// A smooth synthetic field: a sum of `waves` random plane waves cos(k·n + φ) restricted to the
/// sphere, with |k| spread over 2–60 radians⁻¹ and amplitudes ∝ |k|⁻¹, seeded.
pub fn synthetic_waves(pixelization: Pixelization, waves: usize, seed: u64) -> SkyMap {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let modes: Vec<([f64; 3], f64, f64)> = (0..waves)
        .map(|_| {
            let z: f64 = rng.gen_range(-1.0..1.0);
            let phi: f64 = rng.gen_range(0.0..2.0 * PI);
            let k = 2.0 * 30f64.powf(rng.gen_range(0.0..1.0));
            let d = Direction::new(z.acos(), phi).to_vector();
            (
                [k * d[0], k * d[1], k * d[2]],
                rng.gen_range(0.0..2.0 * PI),
                1.0 / k,
            )
        })
        .collect();
    SkyMap::from_fn(pixelization, |d| {
        let v = d.to_vector();
        modes
            .iter()
            .map(|(k, ph, a)| a * (k[0] * v[0] + k[1] * v[1] + k[2] * v[2] + ph).cos())
            .sum()
    })
}

/// The survey mask of the speed benchmark and the plan's waste targets (our own scenario): a map
/// in galactic coordinates observed at |b| > 20°, less 40 circular holes of 0.5°–2.5° (seed 11),
/// within the declination band −70° < δ < +10°; f_sky ≈ 0.37. sin δ is the third row of the
/// galactic → equatorial rotation (the transpose of the Hipparcos equatorial → galactic matrix,
/// ESA 1997, vol. 1 §1.5.3) applied to the galactic unit vector.
///
/// ```
/// use planisphere::{simulate::scenario::benchmark_survey_mask, Ordering, Pixelization};
/// let mask = benchmark_survey_mask(Pixelization::new(64, Ordering::Ring).unwrap()).unwrap();
/// assert!((0.35..0.39).contains(&mask.f_sky()));
/// ```
pub fn benchmark_survey_mask(pixelization: Pixelization) -> crate::Result<Footprint> {
    let galactic = MockFootprint {
        latitude_cut_deg: 20.0,
        star_holes: 40,
        hole_radius_deg: (0.5, 2.5),
        seed: 11,
    }
    .build(pixelization);
    let (lo, hi) = ((-70f64).to_radians().sin(), 10f64.to_radians().sin());
    let band = Footprint::from_fn(pixelization, |d| {
        let v = d.to_vector();
        let sin_dec = -0.483_835_015_5 * v[0] + 0.746_982_244_5 * v[1] + 0.455_983_776_2 * v[2];
        sin_dec > lo && sin_dec < hi
    });
    galactic.intersection(&band)
}
