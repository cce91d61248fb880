//! Apodization: distances to the mask against a brute-force search, and taper profiles against
//! the formulas of Grain, Tristram & Stompor 2009 (PRD 79, 123515, eqs. 31–32).

use planisphere::sky::apodization::{apodize, distance_to_mask, taper, TaperKind};
use planisphere::{Direction, Footprint, Ordering, Pixelization};

/// A footprint with two circular holes and a latitude cut.
fn holey(pix: Pixelization) -> Footprint {
    let h1 = Direction::from_lonlat_deg(40.0, 50.0).to_vector();
    let h2 = Direction::from_lonlat_deg(200.0, -60.0).to_vector();
    Footprint::from_fn(pix, move |d| {
        let v = d.to_vector();
        let dot = |h: [f64; 3]| v[0] * h[0] + v[1] * h[1] + v[2] * h[2];
        d.lat().abs() > 15f64.to_radians()
            && dot(h1) < 8f64.to_radians().cos()
            && dot(h2) < 5f64.to_radians().cos()
    })
}

#[test]
fn distance_to_mask_equals_brute_force_nearest_masked_centre() {
    for ordering in [Ordering::Ring, Ordering::Nested] {
        let pix = Pixelization::new(32, ordering).unwrap();
        let fp = holey(pix);
        let max = 6f64.to_radians();
        let dist = distance_to_mask(&fp, max).unwrap();
        let masked: Vec<Direction> = (0..pix.npix())
            .filter(|&p| fp.weight(p) == 0.0)
            .map(|p| pix.center(p))
            .collect();
        for p in (0..pix.npix()).step_by(5) {
            let c = pix.center(p);
            let brute = if fp.weight(p) == 0.0 {
                0.0
            } else {
                masked.iter().map(|m| c.distance(m)).fold(max, f64::min)
            };
            assert!(
                (dist[p as usize] - brute).abs() < 1e-12,
                "{ordering} pixel {p}"
            );
        }
    }
}

#[test]
fn apodized_weights_follow_the_taper_of_the_distance() {
    let pix = Pixelization::new(64, Ordering::Ring).unwrap();
    let fp = holey(pix);
    let width = 3f64.to_radians();
    let dist = distance_to_mask(&fp, width).unwrap();
    for kind in [TaperKind::C1, TaperKind::C2, TaperKind::Gaussian] {
        let ap = apodize(&fp, kind, width).unwrap();
        let mut interior = 0;
        for (p, &d) in dist.iter().enumerate() {
            let expected = if fp.weights()[p] > 0.0 {
                taper(kind, d, width)
            } else {
                0.0
            };
            assert_eq!(ap.weights()[p], expected);
            if d >= width {
                assert_eq!(ap.weights()[p], 1.0);
                interior += 1;
            }
        }
        assert!(interior > 1000);
        // the taper only removes weight
        assert!(ap.f_sky() < fp.f_sky() && ap.f_sky() > 0.8 * fp.f_sky());
    }
}

#[test]
fn tapers_rise_monotonically_from_zero_to_one_across_the_width() {
    let width = 1f64.to_radians();
    for kind in [TaperKind::C1, TaperKind::C2, TaperKind::Gaussian] {
        let mut last = -1.0;
        for i in 0..=100 {
            let f = taper(kind, width * i as f64 / 100.0, width);
            assert!(f >= last && (0.0..=1.0).contains(&f), "{kind:?} at {i}");
            last = f;
        }
        assert!(taper(kind, 0.0, width) < 2e-3);
        assert_eq!(taper(kind, 1.01 * width, width), 1.0);
    }
}

#[test]
fn fractional_weight_maps_are_used_as_they_are() {
    let pix = Pixelization::new(8, Ordering::Ring).unwrap();
    let w: Vec<f64> = (0..pix.npix()).map(|p| (p % 5) as f64 / 4.0).collect();
    let fp = Footprint::from_weights(pix, w.clone()).unwrap();
    let ap = apodize(&fp, TaperKind::C2, 0.1).unwrap();
    assert_eq!(ap.weights(), &w[..]);
}

#[test]
fn absurd_apodization_widths_are_rejected() {
    let fp = holey(Pixelization::new(8, Ordering::Ring).unwrap());
    let e = apodize(&fp, TaperKind::C1, -1.0).unwrap_err().to_string();
    assert!(e.contains("must be positive"), "{e}");
    let e = apodize(&fp, TaperKind::C1, 1.0).unwrap_err().to_string();
    assert!(e.contains("larger than 30°"), "{e}");
}
