//! Bilinear interpolation of sky maps: reproduces pixel values at pixel centres and converges at
//! second order on a smooth field (bilinear interpolation error O(h²), common practice).

mod common;

use common::SplitMix64;
use planisphere::{Direction, Ordering, Pixelization, SkyMap};
use std::f64::consts::PI;

/// A smooth field: a combination of ℓ ≤ 2 harmonics in Cartesian form.
fn smooth(d: Direction) -> f64 {
    let [x, y, z] = d.to_vector();
    0.3 + z + 0.5 * x * y - 0.7 * (3.0 * z * z - 1.0) + 0.2 * x
}

fn random_directions(n: usize) -> Vec<Direction> {
    let mut rng = SplitMix64(42);
    (0..n)
        .map(|_| {
            Direction::new(
                (1.0 - 2.0 * rng.next_f64()).acos(),
                2.0 * PI * rng.next_f64(),
            )
        })
        .collect()
}

/// Sorted absolute interpolation errors at `dirs`.
fn errors(nside: u32, ordering: Ordering, dirs: &[Direction]) -> Vec<f64> {
    let map = SkyMap::from_fn(Pixelization::new(nside, ordering).unwrap(), smooth);
    let mut e: Vec<f64> = dirs
        .iter()
        .map(|&d| (map.interpolate(d).unwrap().unwrap() - smooth(d)).abs())
        .collect();
    e.sort_by(f64::total_cmp);
    e
}

#[test]
fn interpolation_returns_the_pixel_value_at_pixel_centres() {
    let pix = Pixelization::new(16, Ordering::Nested).unwrap();
    let map = SkyMap::from_fn(pix, smooth);
    for p in (0..pix.npix()).step_by(7) {
        let v = map.interpolate(pix.center(p)).unwrap().unwrap();
        assert!((v - map.get(p).unwrap()).abs() < 1e-9, "pixel {p}");
    }
}

#[test]
fn interpolation_error_falls_fourfold_when_nside_doubles() {
    // Bilinear interpolation is second order, O(h²) (common practice): the typical (median)
    // error falls by ≈ 4 per doubling of NSIDE. cdshealpix's scheme drops to first order only
    // in the few pixels around the base-pixel corners that have seven neighbours (measured:
    // max error 2.1e-2, 1.0e-2, 5.0e-3 at NSIDE 64, 128, 256), so the tail is bounded separately.
    let dirs = random_directions(20_000);
    for ordering in [Ordering::Ring, Ordering::Nested] {
        let e: Vec<Vec<f64>> = [64, 128, 256]
            .iter()
            .map(|&n| errors(n, ordering, &dirs))
            .collect();
        let median = |v: &Vec<f64>| v[v.len() / 2];
        let p99 = |v: &Vec<f64>| v[v.len() * 99 / 100];
        for k in 0..2 {
            let ratio = median(&e[k]) / median(&e[k + 1]);
            assert!(
                (3.0..5.0).contains(&ratio),
                "{ordering}: median ratio {ratio}"
            );
        }
        // h²·max|f''|/8 with h ≈ 0.016 rad at NSIDE 64 and |f''| ≲ 4.5 gives ≈ 1.4e-4 for a
        // square cell; HEALPix cells are diamonds whose diagonal is up to √2·h, hence ×2–3.
        assert!(p99(&e[0]) < 5e-4, "{ordering}: p99 {}", p99(&e[0]));
        assert!(
            p99(&e[2]) < 5e-4 / 16.0 * 1.5,
            "{ordering}: p99 {}",
            p99(&e[2])
        );
    }
}

#[test]
fn invalid_pixels_are_skipped_by_interpolation() {
    let pix = Pixelization::new(8, Ordering::Ring).unwrap();
    let mut values = vec![1.0; pix.npix() as usize];
    let d = Direction::from_lonlat_deg(10.0, 30.0);
    let weights = pix.bilinear_weights(d).unwrap();
    // make one of the four neighbours bad: the others (all 1.0) still give 1.0
    values[weights[0].0 as usize] = f64::NAN;
    let map = SkyMap::new(pix, values).unwrap();
    assert_eq!(map.interpolate(d).unwrap(), Some(1.0));
    // all four bad: nothing to interpolate from
    let mut values = vec![1.0; pix.npix() as usize];
    for (p, _) in weights {
        values[p as usize] = planisphere::sky::skymap::UNSEEN;
    }
    let map = SkyMap::new(pix, values).unwrap();
    assert_eq!(map.interpolate(d).unwrap(), None);
}
