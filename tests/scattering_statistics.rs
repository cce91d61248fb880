//! The labelled full set and the compact set (definitions in src/statistics.rs).

use planisphere::flat::{gaussian_random_field, periodic_coefficients, FlatMap};
use planisphere::transform::ScatteringEngine;
use rand::{Rng, SeedableRng};

const N: usize = 128;

#[test]
fn full_set_serialises_with_label_fields_and_compact_set_has_38_items_for_six_scales() {
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
    let compact = set.compact().unwrap();
    assert_eq!(compact.len(), 38);
    assert_eq!(compact[2].name, "amplitude_scale_0");
    assert_eq!(compact[8].name, "sparsity_scales_0_1");
    assert_eq!(compact[37].name, "shape_anisotropy_scales_4_5");
    // amplitude is the orientation mean of S1
    let s1_mean = (0..4).map(|l| set.first_order(3, l).value).sum::<f64>() / 4.0;
    assert!((compact[5].value - s1_mean).abs() < 1e-15 * s1_mean);
}

/// Map of `count` objects: thin straight segments (filaments) or round Gaussian blobs, on a
/// periodic grid, each of random position/orientation (seeded).
fn objects(filaments: bool, seed: u64) -> FlatMap {
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(seed);
    let mut v = vec![0.0; N * N];
    for _ in 0..40 {
        let (cx, cy): (f64, f64) = (rng.gen_range(0.0..N as f64), rng.gen_range(0.0..N as f64));
        let t: f64 = rng.gen_range(0.0..std::f64::consts::PI);
        for iy in 0..N {
            for ix in 0..N {
                let wrap = |d: f64| d - N as f64 * (d / N as f64).round();
                let (dx, dy) = (wrap(ix as f64 - cx), wrap(iy as f64 - cy));
                let along = dx * t.cos() + dy * t.sin();
                let across = -dx * t.sin() + dy * t.cos();
                v[iy * N + ix] += if filaments {
                    (-(across * across) / 2.0).exp() * (-(along / 20.0).powi(8)).exp()
                } else {
                    (-(dx * dx + dy * dy) / (2.0 * 16.0)).exp()
                };
            }
        }
    }
    FlatMap::new(N, 1e-3, v).unwrap()
}

#[test]
fn filaments_raise_shape_anisotropy_above_round_blobs() {
    // Design property of shape_anisotropy (src/statistics.rs): parallel over perpendicular
    // second-order response is larger for elongated structures.
    let engine = ScatteringEngine::new(N, 5, 4).unwrap();
    let f = periodic_coefficients(&engine, &objects(true, 1))
        .unwrap()
        .compact()
        .unwrap();
    let b = periodic_coefficients(&engine, &objects(false, 1))
        .unwrap()
        .compact()
        .unwrap();
    let pick = |c: &[planisphere::statistics::CompactStatistic], name: &str| {
        c.iter().find(|s| s.name == name).unwrap().value
    };
    let fil = pick(&f, "shape_anisotropy_scales_0_2");
    let blob = pick(&b, "shape_anisotropy_scales_0_2");
    println!("shape_anisotropy_scales_0_2: filaments {fil:.3}, blobs {blob:.3}");
    assert!(fil > blob);
}

#[test]
fn sparse_point_field_is_sparser_than_gaussian_field() {
    // Design property of sparsity (src/statistics.rs): isolated peaks make the envelope of the
    // first-order response fluctuate strongly.
    let engine = ScatteringEngine::new(N, 5, 4).unwrap();
    let g = gaussian_random_field(N, 1e-3, &|_k: f64| 1.0, 3).unwrap();
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(4);
    let mut v = vec![0.0; N * N];
    for _ in 0..30 {
        v[rng.gen_range(0..N * N)] = 1.0;
    }
    let points = FlatMap::new(N, 1e-3, v).unwrap();
    let sg = periodic_coefficients(&engine, &g)
        .unwrap()
        .compact()
        .unwrap();
    let sp = periodic_coefficients(&engine, &points)
        .unwrap()
        .compact()
        .unwrap();
    let name = "sparsity_scales_1_3";
    let (a, b) = (
        sg.iter().find(|s| s.name == name).unwrap().value,
        sp.iter().find(|s| s.name == name).unwrap().value,
    );
    println!("{name}: gaussian {a:.3}, points {b:.3}");
    assert!(b > 2.0 * a);
}
