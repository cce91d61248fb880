//! Thread-count independence of the sphere measurement (crate rule: results bitwise identical
//! for any thread count; common practice for reproducible pipelines).

mod sphere_support;

use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::simulate::skies::SkyRecipe;

#[test]
fn sphere_measurement_is_bitwise_identical_on_one_and_two_threads() {
    let nside = 64;
    let footprint = sphere_support::holed_cap(nside, 4.0, 3.0);
    let recipe = SkyRecipe::gaussian(nside, sphere_support::spectrum(nside), 3);
    let map = recipe.realise(&recipe.transform().unwrap(), 0).unwrap();
    let settings = MeasurementSettings {
        scales: 3,
        ..Default::default()
    };
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let m = SphereMeasurer::new(map.pixelization(), &footprint, settings).unwrap();
            m.measure(&map, &footprint).unwrap()
        })
    };
    let one = run(1);
    let two = run(2);
    assert!(one.tiles > 10, "only {} tiles", one.tiles);
    let (a, b) = (one.vector(), two.vector());
    assert_eq!(a.len(), b.len());
    let differing = a
        .iter()
        .zip(&b)
        .filter(|(x, y)| x.to_bits() != y.to_bits())
        .count();
    assert_eq!(differing, 0, "{differing} of {} values differ", a.len());
    let flags = |s: &planisphere::measure::measurement::MapStatistics| {
        s.coefficients
            .coefficients
            .iter()
            .map(|c| c.trusted)
            .collect::<Vec<_>>()
    };
    assert_eq!(flags(&one), flags(&two));
}
