//! Spherical harmonic synthesis and analysis (iter = 0) at Nside 256, 512, 1024 with
//! lmax = 2 Nside. Run with `cargo bench --bench harmonics`.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use planisphere::harmonics::{alm_from_cl, HarmonicTransform};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;

fn transforms(c: &mut Criterion) {
    let mut group = c.benchmark_group("harmonics");
    group.sample_size(10);
    for nside in [256usize, 512, 1024] {
        let lmax = 2 * nside;
        let transform = HarmonicTransform::new(nside, lmax).expect("valid sizes");
        let cl: Vec<f64> = (0..=lmax)
            .map(|l| 1.0 / (l as f64 + 10.0).powi(2))
            .collect();
        let alm = alm_from_cl(&cl, lmax, &mut ChaCha20Rng::seed_from_u64(1)).expect("valid Cl");
        let map = transform.synthesis(&alm).expect("matching lmax");
        group.bench_with_input(BenchmarkId::new("synthesis", nside), &nside, |b, _| {
            b.iter(|| transform.synthesis(&alm).expect("matching lmax"))
        });
        group.bench_with_input(BenchmarkId::new("analysis_iter0", nside), &nside, |b, _| {
            b.iter(|| transform.analysis(&map, 0).expect("valid map"))
        });
    }
    group.finish();
}

criterion_group!(benches, transforms);
criterion_main!(benches);
