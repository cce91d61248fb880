//! The labelled full set and the layout of the orientation-harmonic summary (definitions in
//! src/scattering/statistics.rs).

use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients};
use planisphere::scattering::transform::ScatteringEngine;

const N: usize = 128;

#[test]
fn full_set_serialises_with_label_fields_and_summary_has_44_items_for_six_scales() {
    let engine = ScatteringEngine::new(N, 6, 4).unwrap();
    let map = gaussian_random_field(N, 1e-3, &|k: f64| 1.0 / (1.0 + k / 500.0), 2).unwrap();
    let set = periodic_coefficients(&engine, &map).unwrap();
    // 2 (order 0) + 24 S1 + 24 P + 15·16 S2
    assert_eq!(set.coefficients.len(), 2 + 24 + 24 + 240);
    let json = serde_json::to_value(&set).unwrap();
    let first = &json["coefficients"][2];
    for key in ["kind", "order", "j1", "l1", "j2", "l2", "value", "trusted"] {
        assert!(first.get(key).is_some(), "missing {key}");
    }
    assert_eq!(first["kind"], "first_order");
    assert_eq!(first["order"], 1);
    assert!(first["j2"].is_null());
    let summary = set.summary().unwrap();
    // 2 + 2J + J(J − 1) items (src/scattering/statistics.rs)
    assert_eq!(summary.len(), 2 + 12 + 30);
    assert_eq!(summary[2].name, "modulus_j0");
    assert_eq!(summary[8].name, "modulus_anisotropy_j0");
    assert_eq!(summary[14].name, "intermittency_j0_j1");
    assert_eq!(summary[43].name, "alignment_j4_j5");
    // the modulus is the orientation mean of S1
    let s1_mean = (0..4).map(|l| set.first_order(3, l).value).sum::<f64>() / 4.0;
    assert!((summary[5].value - s1_mean).abs() < 1e-15 * s1_mean);
    assert_eq!(summary[1].value, set.variance().value.sqrt());
}
