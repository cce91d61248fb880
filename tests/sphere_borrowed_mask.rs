//! A footprint that reads its caller's mask weights in place (`FootprintOf::borrowing`) holds,
//! and is measured with, exactly the weights of the owned footprint made from a copy of them
//! (common practice: a view and a copy of the same numbers give the same result): after the
//! bad values are zeroed, after the map's bad pixels are removed, after every taper, after an
//! intersection, and through the sampler of every sampling method. It stores only the tapered
//! band along the mask's edges and holes, not a second full-sky array.

mod sphere_support;

use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::apodization::{taper_footprint, TaperKind};
use planisphere::sky::skymap::UNSEEN;
use planisphere::tiles::sampling::SamplingMethod;
use planisphere::{Direction, Footprint, FootprintOf, Ordering, Pixelization, SkyMap};

use sphere_support::{assert_same_bits, bits, cross_bits};

/// A binary mask of the cap above 20° latitude with two circular holes; UNSEEN over part of
/// the unobserved sky and NaN at a few pixels (both weigh 0), RING ordering.
fn survey_mask(pix: Pixelization) -> Vec<f64> {
    let holes = [
        (Direction::from_lonlat_deg(40.0, 50.0), 5f64.to_radians()),
        (Direction::from_lonlat_deg(200.0, 35.0), 3f64.to_radians()),
    ];
    (0..pix.npix())
        .map(|p| {
            let d = pix.center(p);
            if d.lat() > 20f64.to_radians() && !holes.iter().any(|(h, r)| d.distance(h) < *r) {
                1.0
            } else if d.lat() < -60f64.to_radians() {
                UNSEEN
            } else if p % 97 == 0 {
                f64::NAN
            } else {
                0.0
            }
        })
        .collect()
}

#[test]
fn borrowed_mask_tapers_bit_for_bit_as_its_owned_copy_and_stores_only_the_edge_band() {
    let nside = 64;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let weights = survey_mask(pix);
    let before = bits(&weights);
    let owned = Footprint::from_weights(pix, weights.clone()).unwrap();
    let borrowed = FootprintOf::borrowing(pix, &weights).unwrap();
    assert!(borrowed.is_borrowed());
    assert_same_bits("owned and borrowed", owned.weights(), borrowed.weights());
    let npix = pix.npix() as usize;
    for (kind, arcmin) in [
        (TaperKind::C2, 300.0),
        (TaperKind::C1, 150.0),
        (TaperKind::Gaussian, 400.0),
        (TaperKind::None, 300.0),
    ] {
        let a = taper_footprint(owned.clone(), kind, arcmin).unwrap();
        let b = taper_footprint(borrowed.clone(), kind, arcmin).unwrap();
        assert_same_bits(&format!("{kind:?}"), a.weights(), b.weights());
        let reads: Vec<f64> = (0..npix).map(|p| b.weights()[p]).collect();
        assert_same_bits(&format!("{kind:?}: pixel reads"), &reads, a.weights());
        assert!(b.is_borrowed(), "{kind:?}");
        // the taper changes the band within `arcmin` of the edges (about 16 % of the sky
        // for 5° at NSIDE 64): the footprint stores that band by blocks, far less than a
        // full-sky copy
        assert!(
            b.stored_weights() < npix / 3,
            "{kind:?}: {} of {npix} weights stored",
            b.stored_weights()
        );
        if kind != TaperKind::None {
            assert!(a.weights().iter().any(|&w| w > 0.0 && w < 1.0), "{kind:?}");
        }
    }
    // the caller's weights are never written
    assert_eq!(bits(&weights), before, "the caller's weights were written");
}

#[test]
fn borrowed_mask_restricted_and_intersected_as_its_owned_copy() {
    let nside = 32;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let weights = survey_mask(pix);
    let mut values: Vec<f64> = (0..pix.npix()).map(|p| (p as f64 * 0.37).sin()).collect();
    for p in (3..values.len()).step_by(29) {
        values[p] = UNSEEN;
    }
    let map = SkyMap::new(pix, values).unwrap();
    let owned = Footprint::from_weights(pix, weights.clone()).unwrap();
    let borrowed = FootprintOf::borrowing(pix, &weights).unwrap();
    let a = owned.clone().into_restricted_to(&map).unwrap();
    let b = borrowed.clone().into_restricted_to(&map).unwrap();
    assert_eq!(bits(a.weights()), bits(b.weights()));
    assert!(b.is_borrowed());
    // a fractional second mask, smaller than the first over part of the sky
    let other: Vec<f64> = (0..pix.npix())
        .map(|p| if pix.center(p).lon() < 3.0 { 0.5 } else { 1.0 })
        .collect();
    let other_owned = Footprint::from_weights(pix, other.clone()).unwrap();
    let other_borrowed = FootprintOf::borrowing(pix, &other).unwrap();
    assert_eq!(
        bits(a.intersection(&other_owned).unwrap().weights()),
        bits(b.intersection(&other_borrowed).unwrap().weights())
    );
    // in another ordering the footprint holds a reordered copy
    let nested = b.to_ordering(Ordering::Nested).unwrap();
    assert!(!nested.is_borrowed());
    assert_eq!(
        bits(nested.weights()),
        bits(a.to_ordering(Ordering::Nested).unwrap().weights())
    );
    assert_eq!(a.summary().f_sky.to_bits(), b.summary().f_sky.to_bits());
    assert_eq!(a.observed_pixels(), b.observed_pixels());
}

#[test]
fn borrowed_tapered_mask_measures_bit_for_bit_as_its_owned_copy_for_every_sampling() {
    let nside = 64;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let recipe = SkyRecipe::gaussian(nside, sphere_support::spectrum(nside), 3);
    let sht = recipe.transform().unwrap();
    let mut values = recipe.realise(&sht, 0).unwrap().values_with_sentinel();
    for p in (0..values.len()).step_by(43) {
        values[p] = UNSEEN;
    }
    let map = SkyMap::new(pix, values).unwrap();
    let second = recipe.realise(&sht, 1).unwrap();
    let weights = survey_mask(pix);
    let owned = taper_footprint(
        Footprint::from_weights(pix, weights.clone())
            .unwrap()
            .into_restricted_to(&map)
            .unwrap(),
        TaperKind::C2,
        200.0,
    )
    .unwrap();
    let borrowed = taper_footprint(
        FootprintOf::borrowing(pix, &weights)
            .unwrap()
            .into_restricted_to(&map)
            .unwrap(),
        TaperKind::C2,
        200.0,
    )
    .unwrap();
    assert!(borrowed.is_borrowed());
    let nested_map = map.to_ordering(Ordering::Nested).unwrap();
    for sampling in [
        SamplingMethod::RingQuintic,
        SamplingMethod::RingCubic,
        SamplingMethod::Bilinear,
        SamplingMethod::RingLinear,
        SamplingMethod::Nearest,
    ] {
        let settings = MeasurementSettings {
            scales: 2,
            sampling,
            ..Default::default()
        };
        let m = SphereMeasurer::new(pix, &owned, settings).unwrap();
        let mb = SphereMeasurer::new(pix, &borrowed, settings).unwrap();
        let (a, b) = (
            m.measure(&map, &owned).unwrap(),
            mb.measure(&map, &borrowed).unwrap(),
        );
        assert!(a.tiles > 3, "only {} tiles", a.tiles);
        assert_eq!(bits(&a.vector()), bits(&b.vector()), "{sampling:?}");
        // a NESTED map reads the footprint brought to its ordering
        assert_eq!(
            bits(&m.measure(&nested_map, &owned).unwrap().vector()),
            bits(&mb.measure(&nested_map, &borrowed).unwrap().vector()),
            "{sampling:?}, NESTED map"
        );
        if sampling == SamplingMethod::RingQuintic {
            let (pa, pb) = (
                m.measure_pair(&map, &second, &owned).unwrap(),
                mb.measure_pair(&map, &second, &borrowed).unwrap(),
            );
            assert_eq!(bits(&pa.first.vector()), bits(&pb.first.vector()));
            assert_eq!(bits(&pa.second.vector()), bits(&pb.second.vector()));
            assert_eq!(cross_bits(&pa), cross_bits(&pb));
        }
    }
}
