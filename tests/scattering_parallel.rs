//! Results do not depend on the number of threads (crate rule: fixed-order reduction), and
//! combining tiles equals pooling their sums by hand (definition of weighted pooling).

use planisphere::measure::flat::gaussian_random_field;
use planisphere::scattering::pooling::{combine_tiles, pooled_coefficients};
use planisphere::scattering::transform::{ScatteringEngine, TileView};

#[test]
fn tile_results_are_bitwise_identical_for_one_and_two_threads() {
    let n = 64;
    let engine = ScatteringEngine::new(n, 5, 4).unwrap();
    let fields: Vec<Vec<f64>> = (0..6)
        .map(|s| {
            gaussian_random_field(n, 1e-3, &|k: f64| 1.0 / (1.0 + k / 300.0), s)
                .unwrap()
                .values()
                .to_vec()
        })
        .collect();
    // Tapers: a disc of varying radius; weights: taper times a core indicator.
    let tapers: Vec<Vec<f64>> = (0..6)
        .map(|t| {
            (0..n * n)
                .map(|i| {
                    let r = ((i % n) as f64 - 32.0).hypot((i / n) as f64 - 32.0);
                    ((26.0 + t as f64 - r) / 5.0).clamp(0.0, 1.0)
                })
                .collect()
        })
        .collect();
    let weights: Vec<Vec<f64>> = tapers
        .iter()
        .map(|a| {
            a.iter()
                .enumerate()
                .map(|(i, &v)| {
                    let (x, y) = (i % n, i / n);
                    if (16..48).contains(&x) && (8..56).contains(&y) {
                        v
                    } else {
                        0.0
                    }
                })
                .collect()
        })
        .collect();
    let tiles: Vec<TileView> = (0..6)
        .map(|t| TileView {
            field: &fields[t],
            taper: &tapers[t],
            weight: &weights[t],
        })
        .collect();
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| engine.transform_tiles(&tiles).unwrap())
    };
    let one = run(1);
    let two = run(2);
    for (a, b) in one.iter().zip(&two) {
        assert_eq!(a.footprint_weight.to_bits(), b.footprint_weight.to_bits());
        for (x, y) in a
            .sums
            .iter()
            .zip(&b.sums)
            .chain(a.weights.iter().zip(&b.weights))
        {
            assert_eq!(x.to_bits(), y.to_bits());
        }
    }
    let c1 = pooled_coefficients(&engine, &combine_tiles(&one).unwrap()).unwrap();
    let c2 = pooled_coefficients(&engine, &combine_tiles(&two).unwrap()).unwrap();
    for (x, y) in c1.coefficients.iter().zip(&c2.coefficients) {
        assert_eq!(x.value.to_bits(), y.value.to_bits());
    }
    // Sequential single-tile calls give the same bits as the parallel batch.
    let single = engine.transform_tile(&tiles[4]).unwrap();
    assert_eq!(single, one[4]);
    // Combined pooling is the ratio of summed sums to summed weights.
    let label = 2 + 4 * 2 + 1; // S1(j = 2, l = 1)
    let num: f64 = one.iter().map(|t| t.sums[label]).sum();
    let den: f64 = one.iter().map(|t| t.weights[label]).sum();
    assert!((c1.coefficients[label].value - num / den).abs() <= 1e-12 * (num / den).abs());
    assert_eq!(
        engine.labels()[label],
        planisphere::scattering::statistics::CoefficientLabel::order_one(
            planisphere::scattering::statistics::CoefficientKind::FirstOrder,
            2,
            1
        )
    );
}

#[test]
fn engine_is_shareable_across_threads() {
    // Compile-time property: one engine is shared by reference across rayon workers.
    fn shareable<T: Send + Sync>() {}
    shareable::<ScatteringEngine>();
    shareable::<planisphere::scattering::filters::MorletBank>();
}
