//! A map that reads its caller's values in place (`SkyMapOf::borrowing`) is measured exactly as
//! the owned map made from a copy of them (common practice: a view and a copy of the same
//! numbers give the same result), bad pixels (UNSEEN, NaN) included.

mod sphere_support;

use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::skymap::UNSEEN;
use planisphere::{Footprint, Ordering, SkyMap, SkyMapOf};

use sphere_support::{bits, cross_bits};

#[test]
fn borrowing_map_with_bad_pixels_measures_bit_for_bit_as_its_owned_copy() {
    let nside = 64;
    let recipe = SkyRecipe::gaussian(nside, sphere_support::spectrum(nside), 5);
    let sht = recipe.transform().unwrap();
    let mut values = recipe.realise(&sht, 0).unwrap().values_with_sentinel();
    let mut second = recipe.realise(&sht, 1).unwrap().values_with_sentinel();
    for p in (0..values.len()).step_by(41) {
        values[p] = UNSEEN;
    }
    for p in (5..second.len()).step_by(53) {
        second[p] = f64::NAN;
    }
    let pix = planisphere::Pixelization::new(nside, Ordering::Ring).unwrap();
    let owned = SkyMap::new(pix, values.clone()).unwrap();
    let borrowed = SkyMapOf::borrowing(pix, &values).unwrap();
    let (owned_b, borrowed_b) = (
        SkyMap::new(pix, second.clone()).unwrap(),
        SkyMapOf::borrowing(pix, &second).unwrap(),
    );
    let cap = sphere_support::holed_cap(nside, 4.0, 3.0);
    let raw_owned = cap.restricted_to(&owned).unwrap();
    let raw_borrowed = cap.clone().into_restricted_to(&borrowed).unwrap();
    assert_eq!(bits(raw_owned.weights()), bits(raw_borrowed.weights()));
    let footprint = raw_owned;
    let settings = MeasurementSettings {
        scales: 2,
        ..Default::default()
    };
    let m = SphereMeasurer::new(pix, &footprint, settings).unwrap();
    let (a, b) = (
        m.measure(&owned, &footprint).unwrap(),
        m.measure(&borrowed, &footprint).unwrap(),
    );
    assert!(a.tiles > 3, "only {} tiles", a.tiles);
    assert_eq!(bits(&a.vector()), bits(&b.vector()));
    let pair_owned = m.measure_pair(&owned, &owned_b, &footprint).unwrap();
    let pair_borrowed = m.measure_pair(&borrowed, &borrowed_b, &footprint).unwrap();
    assert_eq!(cross_bits(&pair_owned), cross_bits(&pair_borrowed));
    assert_eq!(
        bits(&pair_owned.second.vector()),
        bits(&pair_borrowed.second.vector())
    );
    // a footprint of NESTED order restricted to the RING map is reordered first
    let nested = Footprint::of_valid_pixels(&owned)
        .to_ordering(Ordering::Nested)
        .unwrap();
    assert_eq!(
        bits(nested.restricted_to(&borrowed).unwrap().weights()),
        bits(nested.into_restricted_to(&owned).unwrap().weights())
    );
}
