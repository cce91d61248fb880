//! One 128 × 128 tile, J = 6, L = 4, full coefficient set (periodic and masked).

use criterion::{criterion_group, criterion_main, Criterion};
use planisphere::measure::flat::gaussian_random_field;
use planisphere::scattering::transform::{ScatteringEngine, TileView};
use std::hint::black_box;

fn tile(c: &mut Criterion) {
    let n = 128;
    let engine = ScatteringEngine::new(n, 6, 4).expect("valid settings");
    let map = gaussian_random_field(n, 1e-3, &|k: f64| 1.0 / (1.0 + (k / 500.0).powi(2)), 1)
        .expect("valid field");
    let ones = vec![1.0; n * n];
    let taper: Vec<f64> = (0..n * n)
        .map(|i| {
            let r = ((i % n) as f64 - 64.0).hypot((i / n) as f64 - 64.0);
            ((60.0 - r) / 8.0).clamp(0.0, 1.0)
        })
        .collect();
    c.bench_function("tile_128_J6_L4_periodic", |b| {
        b.iter(|| {
            black_box(
                engine
                    .transform_tile(&TileView {
                        field: map.values(),
                        taper: &ones,
                        weight: &ones,
                    })
                    .expect("tile"),
            )
        })
    });
    c.bench_function("tile_128_J6_L4_masked", |b| {
        b.iter(|| {
            black_box(
                engine
                    .transform_tile(&TileView {
                        field: map.values(),
                        taper: &taper,
                        weight: &taper,
                    })
                    .expect("tile"),
            )
        })
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20);
    targets = tile
}
criterion_main!(benches);
