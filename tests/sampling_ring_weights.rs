//! Ring-wise interpolation weights checked against healpy 1.20.1's get_interp_weights
//! (reference-values/ring_interpolation_reference.py).

use planisphere::tiles::sampling::ring_interpolation_weights;
use planisphere::Direction;
use std::collections::BTreeMap;

fn as_map(pairs: impl Iterator<Item = (u64, f64)>) -> BTreeMap<u64, f64> {
    let mut m = BTreeMap::new();
    for (p, w) in pairs {
        *m.entry(p).or_insert(0.0) += w;
    }
    m.retain(|_, w| w.abs() > 1e-13);
    m
}

#[test]
fn ring_weights_match_healpy_get_interp_weights() {
    let path = format!(
        "{}/reference-values/ring_interpolation/weights.csv",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(path).expect("reference file present");
    let mut rows = 0;
    let mut worst = 0.0f64;
    for line in text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("nside"))
    {
        let v: Vec<&str> = line.split(',').collect();
        let nside: u32 = v[0].parse().unwrap();
        let theta: f64 = v[1].parse().unwrap();
        let phi: f64 = v[2].parse().unwrap();
        let pix: Vec<u64> = v[3..7].iter().map(|s| s.parse().unwrap()).collect();
        let wts: Vec<f64> = v[7..11].iter().map(|s| s.parse().unwrap()).collect();
        let expected = as_map(pix.into_iter().zip(wts));
        let ours =
            as_map(ring_interpolation_weights(nside, Direction::new(theta, phi)).into_iter());
        // Same pixels with the same weights (a pixel absent on one side has weight 0).
        for p in expected.keys().chain(ours.keys()) {
            let a = expected.get(p).copied().unwrap_or(0.0);
            let b = ours.get(p).copied().unwrap_or(0.0);
            assert!(
                (a - b).abs() <= 1e-12,
                "NSIDE {nside}, θ {theta}, φ {phi}: {expected:?} vs {ours:?}"
            );
            worst = worst.max((a - b).abs());
        }
        rows += 1;
    }
    assert!(rows >= 10_000);
    assert!(worst <= 1e-12, "worst weight difference {worst:e}");
}

#[test]
fn ring_weights_sum_to_one_and_reproduce_pixel_values_at_centres() {
    // At a pixel centre the weight of that pixel is 1 (interpolation property).
    let pix = planisphere::Pixelization::new(64, planisphere::Ordering::Ring).unwrap();
    for p in (0..pix.npix()).step_by(997) {
        let w = ring_interpolation_weights(64, pix.center(p));
        let total: f64 = w.iter().map(|x| x.1).sum();
        assert!((total - 1.0).abs() < 1e-14);
        let own: f64 = w.iter().filter(|x| x.0 == p).map(|x| x.1).sum();
        assert!((own - 1.0).abs() < 1e-9, "pixel {p}: {w:?}");
    }
}
